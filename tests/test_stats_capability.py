"""Cp and Cpk against the textbook formulas on worked examples, and the database-side moments
against numpy."""

from __future__ import annotations

import math

import numpy as np
import pytest
from hypothesis import given
from hypothesis import strategies as st

from rig.stats.capability import capability, capability_from_moments, moments_from_sums


def test_worked_example_two_sided() -> None:
    # source: AIAG SPC manual definitions, Cp = (USL - LSL)/6s, Cpk = min(USL - mean,
    # mean - LSL)/3s; example from ../shared/SOURCES.md (recomputed there): USL 10.5, LSL 9.5,
    # mean 10.1, s 0.1 -> Cp 1.667, Cpk 1.333
    cap = capability_from_moments(50, 10.1, 0.1, 9.5, 10.5)
    assert cap.cp == pytest.approx(1.667, abs=5e-4)
    assert cap.cpk == pytest.approx(1.333, abs=5e-4)


def test_montgomery_hard_bake_example() -> None:
    # source: Montgomery, Introduction to Statistical Quality Control, the hard-bake flow-width
    # example of the process capability chapter (from memory): USL 2.00, LSL 1.00 micron,
    # sigma-hat 0.1398 -> Cp = 1/(6 x 0.1398) = 1.192 as printed
    cap = capability_from_moments(125, 1.5056, 0.1398, 1.00, 2.00)
    assert cap.cp == pytest.approx(1.192, abs=5e-4)
    # Cpk by the same textbook formula with the example's grand mean 1.5056 (from memory):
    # min(2.00 - 1.5056, 1.5056 - 1.00) / (3 x 0.1398) = 0.4944 / 0.4194 = 1.179
    assert cap.cpk == pytest.approx(1.179, abs=5e-4)


def test_one_sided_limit_has_no_cp() -> None:
    # source: AIAG SPC manual: with one specification limit only Cpu or Cpl is defined
    cap = capability_from_moments(10, 0.004, 0.002, None, 0.02)
    assert cap.cp is None
    assert cap.cpk == pytest.approx((0.02 - 0.004) / (3 * 0.002))


def test_no_spread_or_one_value_gives_no_index() -> None:
    assert capability([5.0, 5.0, 5.0], 4.0, 6.0).cpk is None
    assert capability([5.0], 4.0, 6.0).cp is None


def test_capability_of_values_uses_the_sample_standard_deviation() -> None:
    # source: numpy (general-purpose reference library), std with ddof=1
    values = [9.98, 10.02, 10.05, 9.97, 10.01, 10.00, 10.03]
    cap = capability(values, 9.9, 10.1)
    s = float(np.std(values, ddof=1))
    assert cap.std == pytest.approx(s, rel=1e-12)
    assert cap.cp == pytest.approx(0.2 / (6 * s), rel=1e-12)


@given(
    offset=st.floats(-1e4, 1e4),
    spread=st.floats(1e-4, 10.0),
    seed=st.integers(0, 2**32 - 1),
)
def test_moments_from_shifted_sums_match_numpy(offset: float, spread: float, seed: int) -> None:
    # source: numpy mean and std(ddof=1) on the same values; the sums are shifted by a limit near
    # the data, as ResultStore.step_moments does
    rng = np.random.default_rng(seed)
    values = offset + spread * rng.standard_normal(200)
    shift = offset - 3 * spread
    d = values - shift
    mean, std = moments_from_sums(len(values), float(d.sum()), float((d * d).sum()), shift)
    assert mean == pytest.approx(float(values.mean()), rel=1e-9, abs=1e-9 * spread)
    assert std == pytest.approx(float(values.std(ddof=1)), rel=1e-6)
    assert math.isfinite(std)
