"""The virtual bench: a unit model on a fixture, behind the same wire protocols as real hardware."""
