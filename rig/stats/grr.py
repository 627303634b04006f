"""Gauge repeatability and reproducibility by the ANOVA method (AIAG MSA manual, 4th edition).

A crossed study: every part measured by every operator the same number of times.  The two-way
ANOVA with interaction gives the variance components; a part x operator interaction that is not
significant is pooled into the repeatability, as the manual does.  Pure computation.
"""

from __future__ import annotations

import math
from collections.abc import Sequence
from dataclasses import dataclass

import numpy as np

from rig.errors import RigError
from rig.stats.fdist import f_upper_tail

INTERACTION_ALPHA = 0.05
"""The interaction is pooled when its p-value is at or above this (common practice, no published
source for the level itself)."""

NDC_FACTOR = 1.41
"""ndc = 1.41 x PV / GRR, truncated (AIAG MSA 4th ed.; 1.41 is sqrt(2) rounded as printed)."""

GRR_ACCEPTABLE_PCT = 10.0
GRR_UNACCEPTABLE_PCT = 30.0
NDC_MINIMUM = 5


class GaugeStudyError(RigError):
    """The study's data cannot be analysed: missing cells, unequal trials, too few levels."""


@dataclass(frozen=True)
class Observation:
    """One measurement of a study; ``where`` says where it came from, for error messages."""

    part: str
    operator: str
    trial: int
    value: float
    where: str = ""


@dataclass(frozen=True)
class AnovaRow:
    source: str
    df: int
    ss: float
    ms: float
    f: float | None
    p: float | None


@dataclass(frozen=True)
class GaugeStudy:
    """The result of a study: the ANOVA table, variance components and the usual figures."""

    parts: tuple[str, ...]
    operators: tuple[str, ...]
    trials: int
    anova: tuple[AnovaRow, ...]
    interaction_pooled: bool
    var_repeatability: float
    var_operator: float
    var_interaction: float
    var_part: float

    @property
    def var_reproducibility(self) -> float:
        return self.var_operator + self.var_interaction

    @property
    def var_grr(self) -> float:
        return self.var_repeatability + self.var_reproducibility

    @property
    def var_total(self) -> float:
        return self.var_grr + self.var_part

    def percent_of_total(self, variance: float) -> float:
        """Share of the total standard deviation (the manual's %TV), in percent."""
        return 100.0 * math.sqrt(variance / self.var_total) if self.var_total > 0 else math.nan

    def contribution(self, variance: float) -> float:
        """Share of the total variance (%contribution), in percent."""
        return 100.0 * variance / self.var_total if self.var_total > 0 else math.nan

    @property
    def percent_grr(self) -> float:
        return self.percent_of_total(self.var_grr)

    @property
    def percent_contribution(self) -> float:
        return self.contribution(self.var_grr)

    @property
    def ndc(self) -> int:
        if self.var_grr <= 0:
            return 0 if self.var_part <= 0 else 999
        return int(NDC_FACTOR * math.sqrt(self.var_part / self.var_grr))

    @property
    def verdict(self) -> str:
        """The manual's bands for %GRR, plus its minimum number of distinct categories."""
        pct = self.percent_grr
        if pct < GRR_ACCEPTABLE_PCT:
            band = "acceptable"
        elif pct <= GRR_UNACCEPTABLE_PCT:
            band = "marginal (may be acceptable, depending on the application and cost)"
        else:
            band = "unacceptable"
        if self.ndc < NDC_MINIMUM:
            band += f"; ndc {self.ndc} is below {NDC_MINIMUM}, too coarse to tell parts apart"
        return band


def _cube(observations: Sequence[Observation]) -> tuple[np.ndarray, list[str], list[str]]:
    """Arrange the study as values[part, operator, trial]; every cell must hold the same count."""
    parts = sorted({o.part for o in observations})
    operators = sorted({o.operator for o in observations})
    if len(parts) < 2 or len(operators) < 2:
        raise GaugeStudyError(
            f"a gauge study needs at least 2 parts and 2 operators; got {len(parts)} part(s) and "
            f"{len(operators)} operator(s)"
        )
    cells: dict[tuple[str, str], dict[int, Observation]] = {}
    for obs in observations:
        if not math.isfinite(obs.value):
            raise GaugeStudyError(
                f"{obs.where or 'a measurement'}: value {obs.value} is not a number"
            )
        cell = cells.setdefault((obs.part, obs.operator), {})
        if obs.trial in cell:
            raise GaugeStudyError(
                f"part {obs.part!r}, operator {obs.operator!r}, trial {obs.trial} appears twice "
                f"({cell[obs.trial].where or 'first'} and {obs.where or 'again'})"
            )
        cell[obs.trial] = obs
    counts = {key: len(cell) for key, cell in cells.items()}
    trials = max(counts.values())
    problems = [
        f"part {p!r} operator {o!r}: {counts.get((p, o), 0)} trial(s), expected {trials}"
        for p in parts
        for o in operators
        if counts.get((p, o), 0) != trials
    ]
    if problems:
        raise GaugeStudyError(
            "the study is not balanced (every part needs the same number of trials by every "
            "operator): " + "; ".join(problems[:10]) + (" ..." if len(problems) > 10 else "")
        )
    if trials < 2:
        raise GaugeStudyError("a gauge study needs at least 2 trials per part and operator")
    values = np.empty((len(parts), len(operators), trials))
    for i, p in enumerate(parts):
        for j, o in enumerate(operators):
            cell = cells[(p, o)]
            values[i, j, :] = [cell[t].value for t in sorted(cell)]
    return values, parts, operators


def gauge_rr(observations: Sequence[Observation]) -> GaugeStudy:
    """The ANOVA gauge R&R of a crossed study of parts x operators x trials."""
    y, parts, operators = _cube(observations)
    p, o, r = y.shape
    grand = y.mean()
    part_means = y.mean(axis=(1, 2))
    op_means = y.mean(axis=(0, 2))
    cell_means = y.mean(axis=2)
    ss_total = float(((y - grand) ** 2).sum())
    ss_part = float(o * r * ((part_means - grand) ** 2).sum())
    ss_op = float(p * r * ((op_means - grand) ** 2).sum())
    ss_error = float(((y - cell_means[:, :, None]) ** 2).sum())
    ss_inter = max(0.0, ss_total - ss_part - ss_op - ss_error)
    df_part, df_op = p - 1, o - 1
    df_inter, df_error = df_part * df_op, p * o * (r - 1)
    ms_part, ms_op = ss_part / df_part, ss_op / df_op
    ms_inter, ms_error = ss_inter / df_inter, ss_error / df_error

    f_inter = ms_inter / ms_error if ms_error > 0 else math.inf
    p_inter = f_upper_tail(f_inter, df_inter, df_error)
    pooled = p_inter >= INTERACTION_ALPHA
    if pooled:
        ms_resid = (ss_inter + ss_error) / (df_inter + df_error)
        var_repeat = ms_resid
        var_inter = 0.0
        var_op = max(0.0, (ms_op - ms_resid) / (p * r))
        var_part = max(0.0, (ms_part - ms_resid) / (o * r))
    else:
        var_repeat = ms_error
        var_inter = max(0.0, (ms_inter - ms_error) / r)
        var_op = max(0.0, (ms_op - ms_inter) / (p * r))
        var_part = max(0.0, (ms_part - ms_inter) / (o * r))

    def row(source: str, df: int, ss: float) -> AnovaRow:
        # the table of the model with interaction: main effects are tested against it
        ms = ss / df
        f = ms / ms_inter if ms_inter > 0 else math.inf
        return AnovaRow(source, df, ss, ms, f, f_upper_tail(f, df, df_inter))

    anova = (
        row("part", df_part, ss_part),
        row("operator", df_op, ss_op),
        AnovaRow("part x operator", df_inter, ss_inter, ms_inter, f_inter, p_inter),
        AnovaRow("repeatability", df_error, ss_error, ms_error, None, None),
        AnovaRow("total", p * o * r - 1, ss_total, ss_total / (p * o * r - 1), None, None),
    )
    return GaugeStudy(
        parts=tuple(parts),
        operators=tuple(operators),
        trials=r,
        anova=anova,
        interaction_pooled=pooled,
        var_repeatability=var_repeat,
        var_operator=var_op,
        var_interaction=var_inter,
        var_part=var_part,
    )


def study_summary(study: GaugeStudy) -> dict[str, object]:
    """Plain data for JSON and tables."""
    components = {
        "repeatability": study.var_repeatability,
        "reproducibility": study.var_reproducibility,
        "operator": study.var_operator,
        "part x operator": study.var_interaction,
        "grr": study.var_grr,
        "part": study.var_part,
        "total": study.var_total,
    }
    return {
        "parts": len(study.parts),
        "operators": len(study.operators),
        "trials": study.trials,
        "percent_grr": study.percent_grr,
        "percent_contribution": study.percent_contribution,
        "ndc": study.ndc,
        "verdict": study.verdict,
        "interaction_pooled": study.interaction_pooled,
        "anova": [row.__dict__ for row in study.anova],
        "components": {
            name: {
                "variance": var,
                "std_dev": math.sqrt(var),
                "percent_of_total": study.percent_of_total(var),
                "percent_contribution": study.contribution(var),
            }
            for name, var in components.items()
        },
    }
