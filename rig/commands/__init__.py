"""Subcommands beyond the core ones in ``rig.cli``: one module per command (or family).

Each module here defines ``register(sub)``, which adds its parser(s) to the ``rig`` subparsers and
sets ``func`` to a handler ``(args, out) -> int``.  ``rig.cli`` finds the modules by listing this
package, so a new command is a new file and nothing else.
"""

from __future__ import annotations

import argparse
import importlib
import pkgutil


def register_all(sub: argparse._SubParsersAction[argparse.ArgumentParser]) -> None:
    """Add every command module's parsers, in module-name order."""
    for info in sorted(pkgutil.iter_modules(__path__), key=lambda m: m.name):
        if info.name.startswith("_"):
            continue
        module = importlib.import_module(f"{__name__}.{info.name}")
        module.register(sub)
