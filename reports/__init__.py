"""Rendering stored runs for people and tools (the HTML report and statistics come later)."""
