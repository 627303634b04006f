"""Step kinds by the name they have in sequence files."""

from rig.steps.base import Outcome, Reading, StepKind, StepSpec, SupplyRequest
from rig.steps.harness_step import HarnessProof
from rig.steps.meter_steps import GroundDrop, Resistance, SupplyCurrent, Volts, WireDrop
from rig.steps.model_steps import NtcCheck, RatiometricCheck, ReferenceTemperature
from rig.steps.operator_steps import Prompt, Soak
from rig.steps.rtd_step import RtdCheck

KINDS: dict[str, StepKind] = {
    kind.name: kind
    for kind in (
        Volts(),
        WireDrop(),
        GroundDrop(),
        Resistance(),
        SupplyCurrent(),
        ReferenceTemperature(),
        NtcCheck(),
        RtdCheck(),
        RatiometricCheck(),
        Prompt(),
        Soak(),
        HarnessProof(),
    )
}

__all__ = ["KINDS", "Outcome", "Reading", "StepKind", "StepSpec", "SupplyRequest"]
