"""Gauge R&R by ANOVA against the AIAG MSA 4th edition worked example, against an independent
least-squares ANOVA, and the F tail against scipy; the study CSV reader's errors."""

from __future__ import annotations

import codecs
import json
from pathlib import Path

import numpy as np
import pytest
import scipy.stats
from hypothesis import given
from hypothesis import strategies as st

from rig.cli import main
from rig.stats.fdist import f_upper_tail
from rig.stats.grr import GaugeStudyError, Observation, gauge_rr
from rig.stats.study_csv import read_study_csv

# source: AIAG Measurement Systems Analysis reference manual, 4th edition, the variable gauge
# study data sheet (10 parts x appraisers A, B, C x 3 trials).  Values from memory, cross-checked
# against several independent public transcriptions of the same table; rows are trials 1-3,
# columns parts 1-10.
AIAG_DATA = {
    "A": [
        [0.29, -0.56, 1.34, 0.47, -0.80, 0.02, 0.59, -0.31, 2.26, -1.36],
        [0.41, -0.68, 1.17, 0.50, -0.92, -0.11, 0.75, -0.20, 1.99, -1.25],
        [0.64, -0.58, 1.27, 0.64, -0.84, -0.21, 0.66, -0.17, 2.01, -1.31],
    ],
    "B": [
        [0.08, -0.47, 1.19, 0.01, -0.56, -0.20, 0.47, -0.63, 1.80, -1.68],
        [0.25, -1.22, 0.94, 1.03, -1.20, 0.22, 0.55, 0.08, 2.12, -1.62],
        [0.07, -0.68, 1.34, 0.20, -1.28, 0.06, 0.83, -0.34, 2.19, -1.50],
    ],
    "C": [
        [0.04, -1.38, 0.88, 0.14, -1.46, -0.29, 0.02, -0.46, 1.77, -1.49],
        [-0.11, -1.13, 1.09, 0.20, -1.07, -0.67, 0.01, -0.56, 1.45, -1.77],
        [-0.15, -0.96, 0.67, 0.11, -1.45, -0.49, 0.21, -0.49, 1.87, -2.16],
    ],
}


def aiag_observations() -> list[Observation]:
    return [
        Observation(f"{p + 1:02d}", op, t + 1, v)
        for op, trials in AIAG_DATA.items()
        for t, row in enumerate(trials)
        for p, v in enumerate(row)
    ]


def test_anova_table_matches_the_printed_aiag_table() -> None:
    # source: AIAG MSA 4th ed., ANOVA table of the example (from memory): appraiser df 2,
    # SS 3.1673, MS 1.58363, F 79.41; parts df 9, SS 88.3619, MS 9.81799, F 492.29; appraiser by
    # part df 18, SS 0.3590, MS 0.01994, F 0.434; equipment df 60, SS 2.7589, MS 0.04598;
    # total df 89, SS 94.6471
    rows = {r.source: r for r in gauge_rr(aiag_observations()).anova}
    printed = {
        "operator": (2, 3.1673, 1.58363, 79.41),
        "part": (9, 88.3619, 9.81799, 492.29),
        "part x operator": (18, 0.3590, 0.01994, 0.434),
        "repeatability": (60, 2.7589, 0.04598, None),
    }
    for source, (df, ss, ms, f) in printed.items():
        row = rows[source]
        assert row.df == df
        assert row.ss == pytest.approx(ss, abs=5e-5)
        assert row.ms == pytest.approx(ms, abs=5e-6)
        if f is not None:
            assert row.f == pytest.approx(f, abs=5e-3)
    assert rows["total"].df == 89 and rows["total"].ss == pytest.approx(94.6471, abs=5e-5)


def test_variance_components_and_figures_match_the_aiag_report() -> None:
    # source: AIAG MSA 4th ed., ANOVA method report of the example (from memory), interaction
    # pooled as not significant: EV 0.200, AV 0.227, GRR 0.302, PV 1.042, TV 1.085 (standard
    # deviations); %TV: EV 18.4, AV 20.9, GRR 27.9, PV 96.0; %contribution GRR 7.8; ndc 4
    study = gauge_rr(aiag_observations())
    assert study.interaction_pooled
    assert np.sqrt(study.var_repeatability) == pytest.approx(0.200, abs=5e-4)
    assert np.sqrt(study.var_reproducibility) == pytest.approx(0.227, abs=5e-4)
    assert np.sqrt(study.var_grr) == pytest.approx(0.302, abs=5e-4)
    assert np.sqrt(study.var_part) == pytest.approx(1.042, abs=5e-4)
    assert np.sqrt(study.var_total) == pytest.approx(1.085, abs=5e-4)
    assert study.percent_of_total(study.var_repeatability) == pytest.approx(18.4, abs=0.05)
    assert study.percent_of_total(study.var_reproducibility) == pytest.approx(20.9, abs=0.05)
    assert study.percent_grr == pytest.approx(27.9, abs=0.05)
    assert study.percent_of_total(study.var_part) == pytest.approx(96.0, abs=0.05)
    assert study.percent_contribution == pytest.approx(7.8, abs=0.05)
    assert study.ndc == 4
    # the manual's bands: 10-30 % marginal; ndc under 5 is flagged
    assert study.verdict.startswith("marginal") and "ndc 4" in study.verdict


def _rss(x: np.ndarray, y: np.ndarray) -> float:
    beta, *_ = np.linalg.lstsq(x, y, rcond=None)
    return float(((y - x @ beta) ** 2).sum())


@given(seed=st.integers(0, 2**32 - 1), parts=st.integers(2, 6), ops=st.integers(2, 4))
def test_sums_of_squares_match_nested_least_squares_models(seed: int, parts: int, ops: int) -> None:
    # source: two-way ANOVA from first principles, independent of rig's formulas: each sum of
    # squares is the drop in residual sum of squares when its dummy columns enter a linear model
    # (numpy least squares), for a balanced random study
    rng = np.random.default_rng(seed)
    trials = 3
    obs, ys, pi, oi = [], [], [], []
    for p in range(parts):
        for o in range(ops):
            for t in range(trials):
                v = float(p + 0.3 * o + 0.1 * rng.standard_normal())
                obs.append(Observation(f"p{p}", f"o{o}", t + 1, v))
                ys.append(v)
                pi.append(p)
                oi.append(o)
    y, pa, oa = np.array(ys), np.array(pi), np.array(oi)
    one = np.ones((len(y), 1))
    dp = np.stack([(pa == i).astype(float) for i in range(1, parts)], axis=1)
    do = np.stack([(oa == j).astype(float) for j in range(1, ops)], axis=1)
    dpo = np.stack(
        [((pa == i) & (oa == j)).astype(float) for i in range(1, parts) for j in range(1, ops)],
        axis=1,
    )
    r0 = _rss(one, y)
    r1 = _rss(np.hstack([one, dp]), y)
    r2 = _rss(np.hstack([one, dp, do]), y)
    r3 = _rss(np.hstack([one, dp, do, dpo]), y)
    rows = {r.source: r for r in gauge_rr(obs).anova}
    assert rows["part"].ss == pytest.approx(r0 - r1, rel=1e-9, abs=1e-12)
    assert rows["operator"].ss == pytest.approx(r1 - r2, rel=1e-9, abs=1e-12)
    assert rows["part x operator"].ss == pytest.approx(r2 - r3, rel=1e-7, abs=1e-10)
    assert rows["repeatability"].ss == pytest.approx(r3, rel=1e-9, abs=1e-12)


@given(
    f=st.floats(0.001, 500.0),
    df_num=st.integers(1, 60),
    df_den=st.integers(1, 200),
)
def test_f_upper_tail_matches_scipy(f: float, df_num: int, df_den: int) -> None:
    # source: scipy.stats.f.sf (general-purpose reference library)
    expected = float(scipy.stats.f.sf(f, df_num, df_den))
    assert f_upper_tail(f, df_num, df_den) == pytest.approx(expected, rel=1e-8, abs=1e-300)


def test_an_unbalanced_study_names_the_missing_cells() -> None:
    obs = [
        o
        for o in aiag_observations()
        if not (o.part == "03" and o.operator == "B" and o.trial == 3)
    ]
    with pytest.raises(GaugeStudyError, match="part '03' operator 'B': 2 trial"):
        gauge_rr(obs)


def test_duplicate_trial_and_too_few_operators_are_refused() -> None:
    obs = aiag_observations()
    with pytest.raises(GaugeStudyError, match="appears twice"):
        gauge_rr([*obs, Observation("01", "A", 1, 0.3, "row 99")])
    with pytest.raises(GaugeStudyError, match="at least 2 parts and 2 operators"):
        gauge_rr([o for o in obs if o.operator == "A"])


def write_study_csv(path: Path) -> None:
    lines = ["part,operator,trial,value"]
    lines += [f"{o.part},{o.operator},{o.trial},{o.value}" for o in aiag_observations()]
    path.write_text("\n".join(lines) + "\n", encoding="utf-8")


def test_rig_stats_grr_csv_prints_the_figures_as_json(
    tmp_path: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    # source: AIAG MSA 4th ed. example as above (%GRR 27.9, %contribution 7.8, ndc 4, from memory)
    path = tmp_path / "study.csv"
    write_study_csv(path)
    assert main(["stats", "grr", "--csv", str(path), "--json"]) == 0
    data = json.loads(capsys.readouterr().out)
    assert data["percent_grr"] == pytest.approx(27.9, abs=0.05)
    assert data["percent_contribution"] == pytest.approx(7.8, abs=0.05)
    assert data["ndc"] == 4


def test_rig_stats_grr_csv_prints_tables(
    tmp_path: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    path = tmp_path / "study.csv"
    write_study_csv(path)
    assert main(["stats", "grr", "--csv", str(path)]) == 0
    text = capsys.readouterr().out
    assert "%GRR 27.9 %" in text and "ndc 4" in text and "part x operator" in text


def test_bad_study_csv_names_file_row_and_column(
    tmp_path: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    path = tmp_path / "bad.csv"
    path.write_text("part,operator,trial,value\n1,A,1,0.5\n1,A,two,0.6\n2,,1,abc\n", "utf-8")
    with pytest.raises(GaugeStudyError) as caught:
        read_study_csv(path)
    message = str(caught.value)
    assert f"{path}: row 3: column trial: expected a whole number, got 'two'" in message
    assert f"{path}: row 4: column operator is empty" in message
    assert "column value: expected a finite number, got 'abc'" in message
    assert main(["stats", "grr", "--csv", str(path)]) == 2
    assert "row 3" in capsys.readouterr().err


def test_study_csv_without_the_columns_or_file(tmp_path: Path) -> None:
    path = tmp_path / "cols.csv"
    path.write_text("piece,who,value\n1,A,0.5\n", "utf-8")
    with pytest.raises(GaugeStudyError, match="lacks column\\(s\\) part, operator, trial"):
        read_study_csv(path)
    with pytest.raises(GaugeStudyError, match=r"missing\.csv: file not found"):
        read_study_csv(tmp_path / "missing.csv")


def test_study_csv_names_a_byte_that_is_not_utf8_by_line_and_column(
    tmp_path: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    # 0xE9 is 'e acute' in Latin-1 (ISO/IEC 8859-1); in UTF-8 it is the lead byte of a
    # three-byte sequence and ',' cannot follow it (The Unicode Standard, 3.9, table 3-7).
    # A spreadsheet saved as "CSV" in a Western code page writes such a byte for an operator
    # named with an accent; the reader names its line and column, as for any rig data file.
    path = tmp_path / "latin1.csv"
    path.write_bytes(b"part,operator,trial,value\n1,kim,1,0.5\n1,Ren\xe9,1,0.6\n")
    with pytest.raises(GaugeStudyError) as caught:
        read_study_csv(path)
    expected = (
        f"{path}:3: cannot read the file: the byte 0xe9 at column 6 is not UTF-8; the file "
        "must be UTF-8 text (save it as UTF-8)"
    )
    assert str(caught.value) == expected
    assert main(["stats", "grr", "--csv", str(path)]) == 2
    assert capsys.readouterr().err == f"rig: {expected}\n"


def test_study_csv_saved_as_utf16_is_named_as_such(tmp_path: Path) -> None:
    # FF FE at the start is the UTF-16 little-endian byte-order mark (The Unicode Standard,
    # 23.8); a spreadsheet's "Unicode text" export writes it.  rig asks for UTF-8 by name.
    path = tmp_path / "wide.csv"
    text = "part,operator,trial,value\n1,kim,1,0.5\n"
    path.write_bytes(codecs.BOM_UTF16_LE + text.encode("utf-16-le"))
    with pytest.raises(GaugeStudyError, match=r"wide.csv:1: .*it is UTF-16 text.*save it as UTF-8"):
        read_study_csv(path)
