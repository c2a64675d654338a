"""``python -m skbayeslogit``: the same command line as ``skbayeslogit``."""

from .cli import run

run()
