"""``python -m buildsheet``."""

import sys

from buildsheet.cli.main import main

sys.exit(main())
