"""``--claim`` and ``--remark``: free text an inspector gives at the start of a run (``rig run``,
``rig harness check`` and ``capture``), kept with the run's record (schema 6).  Checked before any
file is loaded or instrument opened, in the words of the option."""

from __future__ import annotations

import argparse

from rig.run_admission import CLAIM_MAX_CHARS, REMARK_MAX_CHARS, claim_problem, remark_problem


def add_record_text_args(parser: argparse.ArgumentParser) -> None:
    """Add ``--claim`` and ``--remark`` to a command that starts a run."""
    parser.add_argument(
        "--claim",
        default="",
        metavar="TEXT",
        help="the claim or return number the unit came in under, for the record (rig runs "
        f"--claim finds it; at most {CLAIM_MAX_CHARS} characters)",
    )
    parser.add_argument(
        "--remark",
        default="",
        metavar="TEXT",
        help="a remark for the record, e.g. what the customer reported (at most "
        f"{REMARK_MAX_CHARS} characters)",
    )


def record_text_problem(args: argparse.Namespace) -> str:
    """Why ``--claim`` or ``--remark`` cannot be kept, in the words of the option; empty when
    both can (asked before any file is loaded or instrument opened)."""
    for option, problem in (
        ("--claim", claim_problem(getattr(args, "claim", ""))),
        ("--remark", remark_problem(getattr(args, "remark", ""))),
    ):
        if problem:
            return f"{option}: {problem}"
    return ""
