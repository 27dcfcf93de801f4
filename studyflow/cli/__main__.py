"""``python -m studyflow.cli`` runs the command line (as the ``studyflow`` script does)."""

import sys

from . import main

sys.exit(main())
