"""Drawing helpers behind :mod:`skbayeslogit.plotting` (matplotlib imported on first use)."""
