"""Checks of estimator parameters and of input data, with one-line errors."""
