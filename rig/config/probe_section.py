"""The station file's ``[reference_probe]`` table: the thermometer reference-temperature steps
read, named in every run's record with its calibration due date, and its accuracy.
"""

from __future__ import annotations

from typing import cast

from rig.config.calibration import read_calibration
from rig.config.reader import Section
from rig.judge.reference_probe import ReferenceProbe
from rig.models.rtd import TOLERANCE_CLASSES, ToleranceClass

ACCURACY_EXPECTED = (
    f"tolerance_class ({', '.join(repr(c) for c in TOLERANCE_CLASSES)}, IEC 60751) or "
    "uncertainty (a certificate's expanded uncertainty, such as '0.05 degC')"
)


def parse_reference_probe(sec: Section | None) -> ReferenceProbe | None:
    """The probe the table states, or None where there is no table or it has problems (each
    recorded at its key)."""
    if sec is None:
        return None
    before = len(sec.doc.problems)
    identity = sec.string("identity")
    if isinstance(identity, str) and not identity.strip():
        sec.problem("identity", "expected the probe's identity (model and serial), found ''")
    due, allow_past_due = read_calibration(sec)
    if not sec.has("calibration_due"):
        sec.missing("calibration_due", "a TOML date such as 2027-06-30")
    has_class, has_u = sec.has("tolerance_class"), sec.has("uncertainty")
    if has_class and has_u:
        sec.problem("uncertainty", "give either tolerance_class or uncertainty, not both")
    elif not has_class and not has_u:
        sec.missing("tolerance_class", ACCURACY_EXPECTED)
        sec.raw("uncertainty")
    cls = sec.string("tolerance_class", None, choices=tuple(TOLERANCE_CLASSES))
    expanded = sec.quantity("uncertainty", "degC", None, positive=True)
    k = sec.number("coverage_factor", 2.0)
    if sec.has("coverage_factor"):
        if not has_u:
            sec.problem("coverage_factor", "belongs with uncertainty (a certificate's k)")
        elif k is not None and k <= 0:
            sec.problem("coverage_factor", f"expected a positive number, found {k:g}")
    sec.reject_unknown()
    if len(sec.doc.problems) > before:
        return None
    return ReferenceProbe(
        identity=str(identity),
        calibration_due=due,
        allow_past_due=allow_past_due,
        tolerance_class=cast(ToleranceClass, cls) if not has_u else None,
        expanded_c=expanded if has_u else None,
        coverage_factor=float(k) if has_u else 2.0,
    )
