"""``rig limits`` on an ``rtd`` step judged by its IEC 60751 class: the present limits are the
class at the temperature each drawn unit is judged at, so their false-reject rate is real.

Outside references:
- IEC 60751:2008, the Callendar-Van Dusen equation R(t) = R0 (1 + A t + B t^2) for t >= 0 degC,
  A = 3.9083e-3, B = -5.775e-7, and class B's tolerance +-(0.30 + 0.005 |t|) degC, computed by
  hand here and turned into ohms through the curve's slope dR/dt = R0 (A + 2 B t);
- JCGM 100:2008 (GUM) 4.3.7 and 4.3.9: a tolerance and a meter's specification are rectangular
  distributions, and the sum of two rectangular ones is trapezoidal; its tail beyond the class
  is integrated here with scipy.integrate.quad over scipy.stats.uniform.
The units and sequences are invented for these tests: a Pt1000 oil sender on the demo screening
fixture; they describe no real product.
"""

from __future__ import annotations

import json
import tomllib
from pathlib import Path

import numpy as np
import pytest
from bench_helpers import SEQUENCES
from pt1000_sender import A, B, pt1000_files
from scipy import integrate, stats

from rig.analysis.limits import study_limits
from rig.cli import main
from rig.commands.limits import load_station_or_virtual
from rig.config.sequence import load_sequence
from rig.config.unit_file import load_unit
from rig.errors import ConfigError
from rig.plan import build_plan


def class_b_ohm(r0: float, t: float | np.ndarray) -> float | np.ndarray:
    """Class B's tolerance in ohm at t >= 0 degC, by hand (IEC 60751)."""
    return (0.30 + 0.005 * np.abs(t)) * r0 * (A + 2 * B * t)


HOT_UNIT = """\
# A Pt1000 element alone in a 100 degC well, invented for this test: no leads, the room exact.
[unit]
name = "pt1000-in-well"
fixture = "{fixture}"

[ambient]
temperature = "23 degC"

[sensors.element]
kind = "rtd"
between = ["T1", "T2"]
r0 = "1000 ohm"
temperature = "100 degC"
tolerance_class = "B"
"""

HOT_SEQUENCE = """\
# Invented: the element read 4-wire against class B at the well's stated 100 degC.
[sequence]
name = "pt1000-well"

[[steps]]
id = "element"
kind = "rtd"
hi = "T1"
lo = "T2"
wires = 4
r0 = "1000 ohm"
temperature = "100 degC"
tolerance_class = "B"
"""


def test_class_limits_reject_the_trapezoids_tail_beyond_the_class(
    tmp_path: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    """An element uniform within class B, read with a meter error uniform within its
    specification, falls outside class B as often as the sum of the two rectangles says; the
    old study reported 0 ppm for any class."""
    fixture = (SEQUENCES / "demo-fixture.toml").resolve()
    unit = tmp_path / "unit.toml"
    unit.write_text(HOT_UNIT.format(fixture=fixture), encoding="utf-8")
    sequence = tmp_path / "sequence.toml"
    sequence.write_text(HOT_SEQUENCE, encoding="utf-8")
    code = main(["limits", str(sequence), "--unit", str(unit), "--seed", "5", "--json"])
    assert code == 0
    [step] = json.loads(capsys.readouterr().out)["steps"]

    r_100 = 1000.0 * (1 + A * 100 + B * 100**2)  # 1385.055 ohm
    band = class_b_ohm(1000.0, 100.0)  # 0.8 degC x 3.7928 ohm/degC = 3.034 ohm
    # the virtual bench's 4-wire accuracy on the 10 kohm range, the smallest that holds
    # 1385 ohm: 0.010 % of reading + 0.001 % of range (rig/sim/bench.py's station table)
    meter = 0.010e-2 * r_100 + 0.001e-2 * 10_000.0
    element = stats.uniform(-band, 2 * band)  # the class in ohm (the curve is straight enough)
    error = stats.uniform(-meter, 2 * meter)

    def rejected_at(x: float) -> float:
        return float(error.sf(band - x) + error.cdf(-band - x))

    expected, _ = integrate.quad(lambda x: element.pdf(x) * rejected_at(x), -band, band)
    assert expected == pytest.approx(meter / (4 * band), rel=1e-6)  # the trapezoid's tail
    # 100000 units: the binomial standard error of a 2 % share is 0.044 %; allow four of them
    sigma = (expected * (1 - expected) / 100_000) ** 0.5
    assert step["present_reject_ppm"] / 1e6 == pytest.approx(expected, abs=4 * sigma)
    assert step["present"] == {
        "tolerance_class": "B",
        "narrowest": pytest.approx(band, rel=1e-9),
        "widest": pytest.approx(band, rel=1e-9),
    }


def _trial_files(folder: Path) -> tuple[Path, Path]:
    """The invented sender read 2-wire, as the trial read it: the station's stored lead zero is
    not its leads', so good units spread wider than the 4-wire reading's."""
    unit, sequence = pt1000_files(folder)
    text = sequence.read_text(encoding="utf-8").replace("wires = 4\n", "")
    sequence.write_text(text.replace('"simple"', '"guarded"'), encoding="utf-8")
    return unit, sequence


def test_class_limits_are_taken_at_each_units_measured_temperature(tmp_path: Path) -> None:
    """Each drawn unit is judged at the well temperature its reference step read, as a run
    judges it: the rejects counted by hand with class B at that temperature are the study's."""
    unit_path, sequence_path = _trial_files(tmp_path)
    unit = load_unit(unit_path)
    plan = build_plan(load_sequence(sequence_path), load_station_or_virtual(None, unit))
    study = study_limits(plan, unit, samples=20_000, seed=2)
    by_id = {d.spec.id: d for d in study.result.steps}
    measured_c = by_id["well"].values
    deviation = by_id["element"].figure
    assert np.ptp(measured_c) > 15.0  # the room spans 15 to 35 degC: the class moves with it
    by_hand = int(np.sum(~(np.abs(deviation) <= class_b_ohm(1000.0, measured_c))))
    [proposal] = study.proposals
    assert by_hand > 1000  # a few lead ohms off the stored zero: far over the target
    assert proposal.present_rejects == by_hand


def test_text_shows_the_class_and_a_warning_that_agrees_with_its_rate(
    tmp_path: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    unit, sequence = _trial_files(tmp_path)
    code = main(["limits", str(sequence), "--unit", str(unit), "--samples", "20000"])
    assert code == 0
    text = capsys.readouterr().out
    [row] = [line for line in text.splitlines() if line.startswith("element ")]
    # class B from about 15 degC (1.46 ohm) to about 35 degC (1.84 ohm), by hand as above
    assert "class B: ±1.4" in row and " .. ±1.8" in row
    warnings = [line for line in text.splitlines() if "present limits catch" in line]
    assert warnings
    for line in warnings:
        assert "only by rejecting" in line and "of good units; no limit that holds 100 ppm" in line
        assert "none of" not in line


def test_toml_says_the_tolerance_goes_in_place_of_the_class(
    tmp_path: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    """Pasted as the comments say (the class deleted, the tolerance in), the sequence loads;
    pasted beside the class, it is refused.  A step with a fixed tolerance gets no such line."""
    unit, sequence = _trial_files(tmp_path)
    assert main(["limits", str(sequence), "--unit", str(unit), "--samples", "2000", "--toml"]) == 0
    text = capsys.readouterr().out
    block = text.split("[element]\n", 1)[1]
    assert '# in place of tolerance_class = "B": delete that key' in block
    assert "in place of tolerance_class where it has one" in text.split("[element]")[0]
    [tolerance] = tomllib.loads(text)["element"].values()
    original = sequence.read_text(encoding="utf-8")
    sequence.write_text(
        original.replace('tolerance_class = "B"', f'tolerance = "{tolerance}"'), encoding="utf-8"
    )
    [step] = [s for s in load_sequence(sequence).steps if s.id == "element"]
    assert step.params["tolerance_class"] is None and step.params["tolerance"] is not None
    sequence.write_text(
        original.replace(
            'tolerance_class = "B"', f'tolerance_class = "B"\ntolerance = "{tolerance}"'
        ),
        encoding="utf-8",
    )
    with pytest.raises(ConfigError, match="give either tolerance_class or tolerance"):
        load_sequence(sequence)

    unit, sequence = _trial_files(tmp_path)
    sequence.write_text(
        original.replace('tolerance_class = "B"', 'tolerance = "1.65 ohm"'), "utf-8"
    )
    assert main(["limits", str(sequence), "--unit", str(unit), "--samples", "2000", "--toml"]) == 0
    assert "# in place of tolerance_class" not in capsys.readouterr().out


def test_the_proposals_tur_is_said_at_the_temperature_the_step_states(
    tmp_path: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    """A sender judged at a stated 100 degC in its well: its TUR is taken there, and said to be
    there, not at the room's 23 degC (which a step reading its bench reference is judged at)."""
    fixture = (SEQUENCES / "demo-fixture.toml").resolve()
    unit = tmp_path / "unit.toml"
    unit.write_text(HOT_UNIT.format(fixture=fixture), encoding="utf-8")
    sequence = tmp_path / "sequence.toml"
    sequence.write_text(HOT_SEQUENCE, encoding="utf-8")
    assert main(["limits", str(sequence), "--unit", str(unit), "--seed", "5", "--json"]) == 0
    [step] = json.loads(capsys.readouterr().out)["steps"]
    assert step["tur"] is not None and step["tur_at_c"] == 100.0
