"""``python -m tfhrv`` runs the command-line interface (same as the ``tfhrv`` command)."""

import sys

from tfhrv.cli import main

sys.exit(main())
