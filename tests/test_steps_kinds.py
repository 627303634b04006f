"""Step kinds' own arithmetic, apart from the bench."""

from __future__ import annotations

import math

from rig.steps.meter_steps import drop_disagreement


def test_direct_and_computed_drops_disagree_beyond_their_expanded_uncertainty() -> None:
    # Two estimates of one drop agree when their difference is within k = 2 times the combined
    # standard uncertainty (GUM 6.2; uncorrelated here, the combined u is the root sum of
    # squares, GUM 5.1.2): 3 and 4 uV combine to 5 uV, so U = 10 uV.
    assert drop_disagreement(59e-6, 3e-6, 50e-6, 4e-6) == ""  # 9 uV apart: agree
    said = drop_disagreement(59e-3, 3e-6, 2.43e-3, 4e-6)  # a contact on one route
    assert said.startswith("direct and computed drops disagree") and "U 10 uV" in said
    assert drop_disagreement(59e-3, math.nan, 2.43e-3, 4e-6) == ""  # no U: nothing to weigh
