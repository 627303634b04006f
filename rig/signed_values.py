"""Command-line values that start with ``-`` and a digit (``--contact-allowance -1mohm``).

argparse reads any word that starts with ``-`` as an option unless it looks like a plain
negative number (``-5``); ``-1mohm`` or ``-5degC`` is neither, so the user saw "expected one
argument" for an option that was given one.  No rig option is spelt ``-`` and a digit, so such
a word after an option that takes a value is that option's value: it is joined to the option
(``--contact-allowance=-1mohm``), and the value's own check then says what is wrong with it.
"""

from __future__ import annotations

import argparse
import re

_SIGNED = re.compile(r"^-\.?\d")
"""A word that starts like a negative number: ``-1mohm``, ``-.5 V``, ``-5degC``."""


def value_options(parser: argparse.ArgumentParser) -> set[str]:
    """The long option strings, of ``parser`` and all its sub-commands, that take one value."""
    found: set[str] = set()
    for action in parser._actions:
        if isinstance(action, argparse._SubParsersAction):
            for sub in action.choices.values():
                found |= value_options(sub)
        elif action.option_strings and action.nargs is None:
            found |= {s for s in action.option_strings if s.startswith("--")}
    return found


def join_signed_values(argv: list[str], options: set[str]) -> list[str]:
    """``argv`` with each ``OPTION -<digit>...`` written as ``OPTION=-<digit>...``, for the
    ``options`` that take a value; everything else as it was (``--`` ends the options)."""
    joined: list[str] = []
    words = iter(argv)
    for word in words:
        if word == "--":
            joined.append(word)
            joined.extend(words)
            break
        if word in options:
            following = next(words, None)
            if following is not None and _SIGNED.match(following):
                joined.append(f"{word}={following}")
                continue
            joined.append(word)
            if following is not None:
                joined.append(following)
            continue
        joined.append(word)
    return joined
