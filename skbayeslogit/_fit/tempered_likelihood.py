"""The bi-tempered logistic loss as the likelihood of the design's passes.

The loss of Amid, Warmuth, Anil & Koren, "Robust Bi-Tempered Logistic Loss
Based on Bregman Divergences" (NeurIPS 2019), computed by the kernels of
:mod:`skbayeslogit._kernels.tempered_dispatch` without the checks of the
public functions: the labels are converted once per fit (:meth:`labels`),
and each objective evaluation only launches kernels.
"""

import numpy as np

from .._kernels.config import serial_kernels
from .._kernels.tempered_dispatch import (
    binary_indexed,
    binary_loss,
    load_cached_loss,
    multiclass_loss,
)


class BiTemperedLikelihood:
    """Weighted bi-tempered loss sum and its gradient in the linear predictor.

    ``loss_grad`` serves every design's gradient pass (``design.loss_grad``):
    ``LinearDesign`` hands it row spans on worker threads, a source design
    the spans of one block at a time; the kernels run serially inside a
    worker.

    For K > 2 each row's tempered-softmax normaliser can be kept from one
    pass to the next as Newton's starting point, which makes a pass much
    cheaper once L-BFGS takes small steps.  The store exists once
    :meth:`labels` was given the labels of every row of the fit (a design
    that does not hold its labels); ``wants_rows`` then asks the design for
    each span's row range. ``warm`` says whether the kept values are valid,
    and is set by the caller between passes, never inside one.  Labels that
    live in a source arrive per block, with no stable row numbers: those
    normalisers start cold.

    Parameters
    ----------
    t1, t2, label_smoothing : float
        Checked by the estimator.
    q : int
        1 for the binary model (activations (0, eta)), else K.
    """

    def __init__(self, t1, t2, label_smoothing, q):
        self.t1, self.t2, self.ls, self.q = float(t1), float(t2), float(label_smoothing), q
        # Flops a row costs, compared with the pass's BLAS work: measured
        # per-row times of the kernels (benchmarks/README.md), in flops.
        self.work_per_row = 1000.0 * (q + 1)
        # int64 codes, except for a binary model whose kernel reads the
        # probability of class 1 (see ``binary_indexed``): float64 codes.
        self.label_dtype = np.int64 if q > 1 or binary_indexed(self.t2) else np.float64
        self.normalisers = None
        self.warm = False
        self._no_probabilities = np.empty((1, q))

    @property
    def wants_rows(self):
        """Whether the design should pass each span's rows (the normalisers are kept)."""
        return self.normalisers is not None

    def load_kernel(self, n):
        """Start loading this loss's kernel from the disk cache for a fit of n rows.

        See :func:`skbayeslogit._kernels.tempered_dispatch.load_cached_loss`.
        """
        load_cached_loss(self.q, self.t1, self.t2, self.ls, n * max(self.q, 2))

    def labels(self, codes):
        """The kernels' labels (``label_dtype``) of class codes (n,), converted once per fit.

        ``codes`` None (a design that holds its labels): None, and labels
        are converted block by block. Otherwise, for K > 2, the
        normalisers of these rows are kept between passes (see the class).
        """
        if codes is None:
            return None
        if self.q > 1:
            self.normalisers = np.empty(len(codes))
            self.warm = False
        return np.require(codes, dtype=self.label_dtype, requirements=["C", "A", "W"])

    def loss_grad(self, y, eta, w, rows=None):
        """Loss sum and gradient in eta (weights included) of a span of rows.

        ``rows`` (start, stop): the span's rows of the fit, whose normalisers
        are kept; None: cold normalisers.
        """
        if y.dtype != self.label_dtype:  # a source's block: encoded labels as they come
            y = y.astype(self.label_dtype)
        with serial_kernels():
            if self.q == 1:
                loss, dloss = self._binary(y, eta)
                return float(w @ loss), dloss * w
            if rows is None:
                normalisers, warm = np.empty(eta.shape[0]), False
            else:
                normalisers, warm = self.normalisers[rows[0] : rows[1]], self.warm
            loss, dloss = self._multiclass(y, eta, normalisers, warm)
        return float(w @ loss), dloss * w[:, None]

    def _binary(self, y, eta):
        loss = np.empty(eta.shape[0])
        grad = np.empty(eta.shape[0])
        binary_loss(eta, y, self.t1, self.t2, self.ls, loss, grad)
        return loss, grad

    def _multiclass(self, y, eta, normalisers, warm):
        loss = np.empty(eta.shape[0])
        grad = np.empty_like(eta)
        multiclass_loss(
            eta, y, self._no_probabilities, True, self.t1, self.t2, self.ls, warm,
            normalisers, loss, grad,
        )  # fmt: skip
        return loss, grad
