"""rig: a controller for automated bench test rigs for sensor circuits and wiring harnesses."""

import logging

__version__ = "0.1.0"

logging.getLogger("rig").addHandler(logging.NullHandler())
