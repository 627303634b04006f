"""Loading and validating rig's data files (unit, fixture, station, sequence): TOML, never code."""
