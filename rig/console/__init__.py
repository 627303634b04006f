"""The operator console (``rig console``): a terminal UI over one station, built with textual.

``setup`` says what it is opened on, ``worker`` runs the engine off the UI thread, ``screens``
hold the views, ``widgets``, ``chart`` and ``plots`` draw them, ``words`` says how results read.
"""

from rig.console.app import ConsoleApp
from rig.console.setup import ConsoleSetup

__all__ = ["ConsoleApp", "ConsoleSetup"]
