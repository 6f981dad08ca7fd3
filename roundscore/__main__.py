"""``python -m roundscore``: the same as the ``roundscore`` command."""

import sys

from .cli import main

sys.exit(main())
