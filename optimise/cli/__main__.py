"""``python -m optimise.cli``."""

import sys

from . import main

sys.exit(main())
