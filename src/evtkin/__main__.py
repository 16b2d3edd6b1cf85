"""``python -m evtkin``: the command-line front end."""

from __future__ import annotations

import sys

from evtkin.cli import main

sys.exit(main())
