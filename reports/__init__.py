"""Rendering stored runs and shop statistics for people (HTML with inline SVG plots) and for
tools (CSV, JSON).  Nothing here measures or judges; it shows what the store holds."""
