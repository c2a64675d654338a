"""``python -m skbayeslogit``: the same command line as ``skbayeslogit``."""

import sys

from .cli import main

sys.exit(main())
