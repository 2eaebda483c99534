"""Allow ``python -m hte``."""

import sys

from hte.cli import main

sys.exit(main())
