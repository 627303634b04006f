"""Values a step hands to a model (a tolerance, a sensor's span, a temperature) that the model
cannot take are bad input: ``rig check`` lists them with file, line and key and exits 2, never 3,
which tells scripts that an instrument failed (exit codes: ``rig/cli.py``).

Where each limit comes from is named beside its case; "common practice" marks a rule with no
published source.
"""

from __future__ import annotations

from pathlib import Path

import pytest
from offline_station import offline_station_text

from rig.cli import EXIT_BAD_INPUT, main
from rig.config.sequence import load_sequence
from rig.config.unit_file import load_unit
from rig.errors import ConfigError, Problem
from rig.models import ModelInputError
from rig.steps import KINDS

SEQUENCES = Path(__file__).resolve().parent.parent / "sequences"
FIXTURE = SEQUENCES / "demo-fixture.toml"

HEAD = '[sequence]\nname = "model-input"\n'
AMBIENT = (
    '\n[[steps]]\nid = "ambient"\nkind = "reference-temperature"\nforce_hi = "PT_FH"\n'
    'sense_hi = "PT_SH"\nforce_lo = "PT_FL"\nsense_lo = "PT_SL"\nlow = "15 degC"\n'
    'high = "35 degC"\n'
)
NTC = (
    '\n[[steps]]\nid = "curve"\nkind = "ntc"\nhi = "C_SIG"\nlo = "C_GND"\nmeasure = "voltage"\n'
    'r25 = "2.0 kohm"\nbeta = "3450 K"\ntemperature_from = "ambient"\npullup = "2.49 kohm"\n'
    'reference = "5.0 V"\ntolerance = "5 %"\n'
)
VOLTS = (
    '\n[[steps]]\nid = "supply"\nkind = "volts"\nhi = "C_SIG"\nlo = "C_GND"\nnominal = "5 V"\n'
    'tolerance = "5 %"\n'
)
RATIO = (
    '\n[[steps]]\nid = "output-fraction"\nkind = "ratiometric"\noutput = "P_SIG"\n'
    'power = "P_5V"\nground = "P_GND"\nrange_low = "0 bar"\nrange_high = "5 bar"\n'
    'tolerance = "2 %"\n'
)


def swap(text: str, old: str, new: str) -> str:
    assert text.count(old) == 1, f"{old!r} must occur once"
    return text.replace(old, new)


def line_with(text: str, fragment: str) -> int:
    hits = [n for n, line in enumerate(text.splitlines(), 1) if fragment in line]
    assert len(hits) == 1, f"{fragment!r} is on lines {hits}"
    return hits[0]


def check(tmp_path: Path, text: str, capsys: pytest.CaptureFixture[str]) -> list[str]:
    """``rig check`` on ``text``: it must exit 2; the problem lines it printed."""
    sequence = tmp_path / "seq.toml"
    sequence.write_text(text, encoding="utf-8")
    station = tmp_path / "station.toml"
    station.write_text(offline_station_text("model-input", FIXTURE, tmp_path / "data"))
    code = main(["check", str(sequence), "--station", str(station)])
    err = capsys.readouterr().err
    assert code == EXIT_BAD_INPUT, err
    assert err.startswith("rig: the input has problems:"), err
    return [line.strip() for line in err.splitlines()[1:]]


CASES = [
    # a negative tolerance widens nothing; zero leaves limits no reading passes under the
    # guarded rule (common practice: a tolerance is a positive half-width)
    ("ntc-negative-percent", HEAD + AMBIENT + NTC, 'tolerance = "5 %"', 'tolerance = "-5 %"'),
    ("volts-negative-percent", HEAD + VOLTS, 'tolerance = "5 %"', 'tolerance = "-5 %"'),
    ("ntc-zero-percent", HEAD + AMBIENT + NTC, 'tolerance = "5 %"', 'tolerance = "0 %"'),
    # a linear transfer needs two distinct points (common practice)
    ("ratiometric-empty-span", HEAD + RATIO, 'range_high = "5 bar"', 'range_high = "0 bar"'),
    (
        "ratiometric-fraction",
        HEAD + RATIO,
        'tolerance = "2 %"',
        'tolerance = "2 %"\nfraction_low = 1.5',
    ),
    (
        "ratiometric-flat",
        HEAD + RATIO,
        'tolerance = "2 %"',
        'tolerance = "2 %"\nfraction_low = 0.5\nfraction_high = 0.5',
    ),
    # nothing is colder than absolute zero, -273.15 degC (SI Brochure, 9th ed., the kelvin)
    (
        "ntc-below-absolute-zero",
        HEAD + NTC,
        'temperature_from = "ambient"',
        'temperature = "-300 degC"',
    ),
    # IEC 60751 defines the Pt100 curve from -200 degC to 850 degC only
    ("pt100-beyond-its-curve", HEAD + AMBIENT, 'high = "35 degC"', 'high = "900 degC"'),
]


@pytest.mark.parametrize(("text", "old", "new"), [c[1:] for c in CASES], ids=[c[0] for c in CASES])
def test_values_a_model_refuses_are_one_located_problem_and_exit_2(
    tmp_path: Path, capsys: pytest.CaptureFixture[str], text: str, old: str, new: str
) -> None:
    broken = swap(text, old, new)
    (printed,) = check(tmp_path, broken, capsys)
    last = new.splitlines()[-1]
    key = last.split("=")[0].strip()
    assert f"seq.toml:{line_with(broken, last)} [" in printed
    assert f".{key}]: " in printed
    assert not any(name in printed for name in ("p_min", "pct =", "temp_c", "frac_min"))


def test_a_model_that_overflows_while_planning_is_a_problem_of_the_step(
    tmp_path: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    # R(T) = R25 exp(B (1/T - 1/T25)), the Beta form of a thermistor data sheet, overflows a
    # double (IEEE 754, largest about 1.8e308) at -200 degC for B = 1e6 K: no range can be held
    text = swap(HEAD + NTC, 'temperature_from = "ambient"', 'temperature = "-200 degC"')
    text = swap(text, 'beta = "3450 K"', 'beta = "1e6 K"')
    text = swap(text, 'measure = "voltage"', 'measure = "resistance"')
    text = swap(text, 'pullup = "2.49 kohm"\nreference = "5.0 V"\n', "")
    (printed,) = check(tmp_path, text, capsys)
    assert "outside what the model takes" in printed
    assert f"seq.toml:{line_with(text, '[[steps]]')} [steps[0]]" in printed


def test_a_model_error_no_check_foresaw_is_still_a_problem(
    tmp_path: Path, monkeypatch: pytest.MonkeyPatch
) -> None:
    def refuses(*_: object) -> None:
        raise ModelInputError("an argument no check of the kind's looked at")

    monkeypatch.setattr(KINDS["volts"], "parse", refuses)
    path = tmp_path / "seq.toml"
    path.write_text(HEAD + VOLTS, encoding="utf-8")
    with pytest.raises(ConfigError) as caught:
        load_sequence(path)
    (problem,) = caught.value.problems
    assert problem == Problem(
        str(path),
        "steps[0]",
        "the values are outside what the model takes: an argument no check of the kind's looked at",
        line=line_with(HEAD + VOLTS, "[[steps]]"),
    )


UNIT_CASES = [
    # the same transfer as a ratiometric step's (common practice: two distinct points)
    ("pressure", "span", 'range_high = "500 kPa"', 'range_high = "0 kPa"'),
    ("pressure", "fraction", "fraction_high = 0.9", "fraction_high = 1.2"),
    # SI Brochure, 9th ed.: nothing is colder than -273.15 degC
    ("temp", "sensor-below-absolute-zero", 'temperature = "ambient"', 'temperature = "-300 degC"'),
    # IEC 60751: the reference Pt100's curve spans -200 degC to 850 degC
    ("temp", "ambient-off-the-pt100-curve", 'temperature = "23 degC"', 'temperature = "-250 degC"'),
    # Steinhart and Hart (1968): B > 0, or resistance would rise with temperature
    (
        "temp",
        "steinhart-hart-b",
        'r25 = "2.0 kohm"\nbeta = "3450 K"\ntemperature = "ambient"\nr25_tolerance = "2 %"\n'
        'beta_tolerance = "1 %"',
        "steinhart_hart = [1.4e-3, 0.0, 1e-7]",
    ),
]


@pytest.mark.parametrize(
    ("unit", "old", "new"), [(c[0], *c[2:]) for c in UNIT_CASES], ids=[c[1] for c in UNIT_CASES]
)
def test_a_unit_file_with_values_its_models_refuse_does_not_load(
    tmp_path: Path, unit: str, old: str, new: str
) -> None:
    base = (SEQUENCES / "units" / f"{unit}-circuit.toml").read_text(encoding="utf-8")
    text = swap(base, "../demo-fixture.toml", str(FIXTURE))
    text = swap(text, old, new)
    path = tmp_path / "unit.toml"
    path.write_text(text, encoding="utf-8")
    with pytest.raises(ConfigError) as caught:
        load_unit(path)
    (problem,) = caught.value.problems
    last = new.splitlines()[-1]
    assert problem.line == line_with(text, last)
    assert problem.key.endswith(last.split("=")[0].strip())


def test_a_temperature_on_a_sensor_it_cannot_change_is_a_problem(tmp_path: Path) -> None:
    # only an NTC's value is a function of its own temperature (Steinhart-Hart, Beta model); on
    # a ratiometric sensor the key would be read and silently do nothing
    base = (SEQUENCES / "units" / "pressure-circuit.toml").read_text(encoding="utf-8")
    text = swap(base, "../demo-fixture.toml", str(FIXTURE))
    text = swap(text, 'kind = "ratiometric"', 'kind = "ratiometric"\ntemperature = "80 degC"')
    path = tmp_path / "unit.toml"
    path.write_text(text, encoding="utf-8")
    with pytest.raises(ConfigError) as caught:
        load_unit(path)
    (problem,) = caught.value.problems
    assert problem.key.endswith(".temperature") and "unknown key" in problem.message
    assert problem.line == line_with(text, 'temperature = "80 degC"')
