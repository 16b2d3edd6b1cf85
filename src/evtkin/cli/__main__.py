"""``python -m evtkin.cli``: the command-line front end."""

from __future__ import annotations

import sys

from evtkin.cli import main

sys.exit(main())
