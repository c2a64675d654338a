"""Compiled (numba) kernels: pointwise losses, derivatives and moments; they never validate."""
