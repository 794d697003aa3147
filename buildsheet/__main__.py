"""``python -m buildsheet``."""

import sys

from buildsheet.cli import main

sys.exit(main())
