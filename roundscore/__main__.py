"""``python -m roundscore``: the same as the ``roundscore`` command."""

import sys

from roundscore.cli import main

sys.exit(main())
