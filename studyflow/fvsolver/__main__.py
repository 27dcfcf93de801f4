"""Allow ``python -m studyflow.fvsolver case.toml``."""

import sys

from .cli import main

sys.exit(main())
