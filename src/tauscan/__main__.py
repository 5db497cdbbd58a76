"""Allow ``python -m tauscan``."""

import sys

from tauscan.cli import main

sys.exit(main())
