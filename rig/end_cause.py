"""Why a run ended short of deciding anything, as a short code stored with the run (schema 6).

The engine words a run's ``reason`` for a person; a QA tally needs the cause as data, so that a
reworded reason never moves a run from one cause to another (``rig.screening.undecided_cause``).
Runs recorded before schema 6 have no code (NULL) and are read from their reason instead.
"""

from __future__ import annotations

from enum import StrEnum


class EndCause(StrEnum):
    """The stored codes; ``NONE`` (empty) for a run that went to its end."""

    NONE = ""
    OPERATOR_STOP = "operator-stop"
    """The operator stopped the run (the stop switch, Ctrl-C or SIGTERM)."""
    NO_ANSWER = "no-answer"
    """A question to the operator got no answer (input ended, the terminal went away)."""
    DECLINED = "declined"
    """The operator answered no to a question the sequence says stops the run."""
    INSTRUMENT = "instrument-fault"
    """An instrument failed, or the bench could not be made safe."""
    STEP_ERROR = "step-error"
    """A step could not measure (its verdict is ``error``)."""
    CONFIGURATION = "configuration"
    """A setting of the sequence or station does not fit what the bench found (a Pt1000 read
    with a Pt100's r0): a file to correct, not a fault of the unit or the bench."""
    CONTROLLER_STOPPED = "controller-stopped"
    """The controller stopped mid-run; the next run on the station marked it incomplete."""
    STORE = "store"
    """The results store could not be written."""
    OTHER = "other"
