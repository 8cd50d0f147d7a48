"""``python -m cationcalc.cli``."""

import sys

from cationcalc.cli.main import main

sys.exit(main())
