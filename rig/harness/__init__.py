"""Harness testing: wire lists, continuity against copper, isolation by group testing, naming
miswires, and capturing a wire list from a known-good harness (see docs/harness.md)."""
