"""Shop statistics: yield, failure Pareto, capability and gauge R&R.

Everything here is computation on values and tables handed in (no files, no database), so each
formula can be checked against its published source on its own.  Loading from a results store
lives in ``rig.stats.from_store``.
"""
