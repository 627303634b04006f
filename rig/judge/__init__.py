"""Judging measurements: meter accuracy, propagation of uncertainty, decision rules.

Pure computation, no I/O.  ``test_uncertainty_ratio`` is re-exported here; test modules should
reach it as ``rig.judge.test_uncertainty_ratio`` so that pytest does not collect it.
"""

from rig.judge.accuracy import (
    FUNCTIONS,
    AccuracySpec,
    AccuracyTable,
    rectangular_u,
    resolution_u,
)
from rig.judge.decision import (
    SCPI_OVERLOAD,
    TUR_MINIMUM,
    DecisionRule,
    Limits,
    Verdict,
    false_accept_risk_at_limit,
    is_no_reading,
    judge,
    test_uncertainty_ratio,
    tur_is_low,
    worst,
)
from rig.judge.propagate import (
    DEFAULT_K,
    combine,
    expanded,
    u_difference,
    u_difference_one_range,
    u_quotient,
    u_temperature_from_resistance,
)

__all__ = [
    "DEFAULT_K",
    "FUNCTIONS",
    "SCPI_OVERLOAD",
    "TUR_MINIMUM",
    "AccuracySpec",
    "AccuracyTable",
    "DecisionRule",
    "Limits",
    "Verdict",
    "combine",
    "expanded",
    "false_accept_risk_at_limit",
    "is_no_reading",
    "judge",
    "rectangular_u",
    "resolution_u",
    "test_uncertainty_ratio",
    "tur_is_low",
    "u_difference",
    "u_difference_one_range",
    "u_quotient",
    "u_temperature_from_resistance",
    "worst",
]
