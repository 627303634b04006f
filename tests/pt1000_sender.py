"""The invented Pt1000 oil sender of the rtd tests: its unit file and screen, and IEC 60751's
curve by hand.

Outside references: IEC 60751:2008, the Callendar-Van Dusen equation R(t) = R0 (1 + A t + B t^2)
for t >= 0 degC with A = 3.9083e-3, B = -5.775e-7, and its slope dR/dt = R0 (A + 2 B t).
The unit is invented for the tests: a Pt1000 oil sender on the demo screening fixture.
"""

from __future__ import annotations

from pathlib import Path

from bench_helpers import SEQUENCES

A, B = 3.9083e-3, -5.775e-7  # IEC 60751


def pt_r(r0: float, t: float) -> float:
    """R(t) by hand, t >= 0 degC (IEC 60751)."""
    return r0 * (1 + A * t + B * t * t)


def pt_slope(r0: float, t: float) -> float:
    return r0 * (A + 2 * B * t)


UNIT = """\
# An oil-temperature sender with a Pt1000 element, invented for this test.
[unit]
name = "pt1000-sender"
fixture = "{fixture}"

[ambient]
temperature = "23 degC"
temperature_range = ["15 degC", "35 degC"]

[sensors.element]
kind = "rtd"
between = ["T1x", "T2x"]
r0 = "1000 ohm"
tolerance_class = "B"

[wires.lead_a]
between = ["T1", "T1x"]
gauge = "20 AWG"
length = "0.25 m"

[wires.lead_b]
between = ["T2x", "T2"]
gauge = "20 AWG"
length = "0.25 m"

[reference_probe]
force_hi = "PT_FH"
sense_hi = "PT_SH"
force_lo = "PT_FL"
sense_lo = "PT_SL"
r0 = "100 ohm"
lead_resistance = "0.15 ohm"
tolerance_class = "A"
"""

SEQUENCE = """\
# A screen for the invented Pt1000 sender; limits are the element's own class.
[sequence]
name = "pt1000-screen"
decision_rule = "simple"

[[steps]]
id = "well"
kind = "reference-temperature"
force_hi = "PT_FH"
sense_hi = "PT_SH"
force_lo = "PT_FL"
sense_lo = "PT_SL"
low = "10 degC"
high = "40 degC"

[[steps]]
id = "element"
kind = "rtd"
hi = "T1"
lo = "T2"
wires = 4
r0 = "1000 ohm"
temperature_from = "well"
{tolerance}
"""


def pt1000_files(folder: Path, tolerance: str = 'tolerance_class = "B"') -> tuple[Path, Path]:
    fixture = (SEQUENCES / "demo-fixture.toml").resolve()
    unit = folder / "unit.toml"
    unit.write_text(UNIT.format(fixture=fixture), encoding="utf-8")
    sequence = folder / "sequence.toml"
    sequence.write_text(SEQUENCE.format(tolerance=tolerance), encoding="utf-8")
    return unit, sequence
