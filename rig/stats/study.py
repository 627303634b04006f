"""The options that put a run into a gauge study: which part, which trial, by whom."""

from __future__ import annotations


def study_problem(part: str | None, trial: int | None, operator: str) -> str | None:
    """What is wrong with a run's study options, or None when they are fine (or absent).

    A study run needs all three: the part and trial place it in the study grid, and the operator
    is the appraiser whose reproducibility the study measures.
    """
    if not part and trial is None:
        return None
    if not part or not part.strip():
        return "--study-trial needs --study-part (the part measured in this trial)"
    if trial is None:
        return "--study-part needs --study-trial (1 for the first trial, 2 for the second, ...)"
    if trial < 1:
        return f"--study-trial: expected a trial number of 1 or more, got {trial}"
    if not operator.strip():
        return "a gauge-study run needs --operator (the appraiser of this trial)"
    return None
