"""``python -m rig``: the ``rig`` command, for an environment whose scripts folder is not on the
PATH."""

from rig.cli import main

raise SystemExit(main())
