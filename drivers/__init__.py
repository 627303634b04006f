"""Instrument drivers.

Everything above this package uses only the protocols in ``drivers.base``.
"""
