"""The engineer's tools: what a sequence would read on a unit with faults, which faults it
catches, and which fault best explains a run that failed.

Everything here works on the same circuit as the virtual bench (``rig.unit_circuit`` on the
fixture, seen through the meter's front end), so a prediction and a bench run cannot disagree.
Pure computation: callers load files and stores and hand the models in.
"""
