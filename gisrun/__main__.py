"""Allow ``python -m gisrun``."""

import sys

from .cli import main

sys.exit(main())
