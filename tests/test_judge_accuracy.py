"""A meter's accuracy spec turned into standard uncertainty."""

from __future__ import annotations

import enum
import math

import numpy as np
import pytest

from rig.judge import AccuracySpec, AccuracyTable, rectangular_u, resolution_u
from rig.models import ModelInputError

# An illustrative spec table of our own (not any meter's data sheet)
TABLE = AccuracyTable(
    {
        "dcv": [
            (10.0, AccuracySpec.from_ppm(35, 5)),
            (0.1, AccuracySpec.from_ppm(50, 35)),
            (1.0, AccuracySpec.from_ppm(40, 7)),
            (100.0, AccuracySpec.from_ppm(45, 6)),
        ],
        "res4w": [(100.0, AccuracySpec(0.010, 0.004)), (1000.0, AccuracySpec(0.010, 0.001))],
    }
)


def test_half_width_hand_calculation() -> None:
    # +-(0.0035 % of reading + 0.0005 % of range): 5 V on the 10 V range gives
    # 1.75e-4 + 5e-5 = 2.25e-4 V (hand calculation)
    spec = AccuracySpec(pct_reading=0.0035, pct_range=0.0005)
    assert spec.half_width(5.0, 10.0) == pytest.approx(2.25e-4, rel=1e-12)
    assert spec.half_width(-5.0, 10.0) == pytest.approx(2.25e-4, rel=1e-12)


def test_ppm_is_the_same_spec() -> None:
    # 35 ppm = 0.0035 % (definition of ppm and %)
    assert AccuracySpec.from_ppm(35, 5) == AccuracySpec(0.0035, 0.0005)


def test_rectangular_u_is_a_over_sqrt3() -> None:
    # JCGM 100:2008, GUM, 4.3.7 and 6.2: u = a / sqrt(3)
    spec = AccuracySpec(0.0035, 0.0005)
    assert spec.standard_uncertainty(5.0, 10.0) == pytest.approx(2.25e-4 / math.sqrt(3))
    assert rectangular_u(1.0) == pytest.approx(0.5773502692, rel=1e-10)


def test_rectangular_u_against_monte_carlo() -> None:
    # JCGM 100:2008, GUM, 4.3.7: the standard deviation of a uniform +-a distribution is
    # a / sqrt(3); a seeded sample of 400 000 has a relative standard error near 0.1 %, so a 1 %
    # tolerance is ten standard errors away
    rng = np.random.default_rng(4_3_7)
    a = 2.5e-4
    sample = rng.uniform(-a, a, 400_000)
    assert float(np.std(sample)) == pytest.approx(rectangular_u(a), rel=0.01)


def test_resolution_u_is_delta_over_sqrt12() -> None:
    # JCGM 100:2008, GUM, 4.3.7 and 6.2 (resolution delta: u = delta / sqrt(12)), checked by
    # rounding a seeded spread of values to 1 mV and measuring the rounding error
    assert resolution_u(1e-3) == pytest.approx(1e-3 / math.sqrt(12))
    rng = np.random.default_rng(12)
    x = rng.uniform(0.0, 5.0, 400_000)
    err = np.round(x / 1e-3) * 1e-3 - x
    assert float(np.std(err)) == pytest.approx(resolution_u(1e-3), rel=0.01)


def test_spec_for_the_range_in_use() -> None:
    assert TABLE.spec_for("dcv", 1.0) == AccuracySpec.from_ppm(40, 7)
    assert TABLE.spec_for("res4w", 1000.0) == AccuracySpec(0.010, 0.001)
    assert TABLE.ranges("dcv") == [0.1, 1.0, 10.0, 100.0]


def test_range_for_is_what_autorange_picks() -> None:
    # common practice, no published source: autorange settles on the smallest range that holds
    # the value
    assert TABLE.range_for("dcv", 0.05) == 0.1
    assert TABLE.range_for("dcv", -0.5) == 1.0
    assert TABLE.range_for("dcv", 1.0) == 1.0
    assert TABLE.range_for("dcv", 1.0001) == 10.0


def test_functions_may_be_given_as_an_enum() -> None:
    class Fn(enum.Enum):
        DCV = "dcv"

    assert TABLE.range_for(Fn.DCV, 3.0) == 10.0


def test_table_errors_are_clear() -> None:
    with pytest.raises(ModelInputError, match=r"range 2\.0 is not listed for 'dcv'"):
        TABLE.spec_for("dcv", 2.0)
    with pytest.raises(ModelInputError, match=r"exceeds the largest range 100\.0"):
        TABLE.range_for("dcv", 250.0)
    with pytest.raises(ModelInputError, match="no entry for 'dci'"):
        TABLE.spec_for("dci", 1.0)
    with pytest.raises(ModelInputError, match="'acv' is not known"):
        TABLE.spec_for("acv", 1.0)
    with pytest.raises(ModelInputError, match="twice"):
        AccuracyTable({"dcv": [(1.0, AccuracySpec(0.01, 0.0)), (1.0, AccuracySpec(0.02, 0.0))]})
    with pytest.raises(ModelInputError, match="pct_reading"):
        AccuracySpec(-0.01, 0.0)
    with pytest.raises(ModelInputError, match="range_"):
        AccuracySpec(0.01, 0.0).half_width(1.0, 0.0)
