"""Fitting: likelihoods, special functions, the Newton MAP solver and the Gaussian posterior."""
