"""The bi-tempered logistic loss as the likelihood of the design's passes.

The loss of Amid, Warmuth, Anil & Koren, "Robust Bi-Tempered Logistic Loss
Based on Bregman Divergences" (NeurIPS 2019), computed by the kernels of
:mod:`skbayeslogit._kernels.tempered_dispatch` without the checks of the
public functions: the labels are converted once per fit (:meth:`labels`),
and each objective evaluation only launches kernels.
"""

import numpy as np

from .._kernels.config import serial_kernels
from .._kernels.tempered_dispatch import binary_indexed, binary_loss, multiclass_loss


class BiTemperedLikelihood:
    """Weighted bi-tempered loss sum and its gradient in the linear predictor.

    Two entry points share the kernels and their arithmetic:

    - :meth:`loss_grad` for the in-memory gradient pass
      (``LinearDesign.loss_grad`` hands it row spans on worker threads, each
      span's predictor, loss and gradient while the span of X is in cache;
      the kernels run serially inside a worker).  For K > 2 each row's
      tempered-softmax normaliser is kept from one pass to the next as
      Newton's starting point; ``warm`` says whether the kept values are
      valid, and is set by the caller between passes, never inside one.
    - :meth:`value_grad` for the blocks of an out-of-core pass (cold
      normalisers: the blocks are not kept).

    Parameters
    ----------
    t1, t2, label_smoothing : float
        Checked by the estimator.
    q : int
        1 for the binary model (activations (0, eta)), else K.
    n_rows : int
        Rows of the in-memory data (the normalisers kept between passes).
    """

    wants_rows = True

    def __init__(self, t1, t2, label_smoothing, q, n_rows):
        self.t1, self.t2, self.ls, self.q = float(t1), float(t2), float(label_smoothing), q
        # Flops a row costs, compared with the pass's BLAS work: measured
        # per-row times of the kernels (benchmarks/README.md), in flops.
        self.work_per_row = 1000.0 * (q + 1)
        self.normalisers = np.empty(n_rows) if q > 1 else None
        self.warm = False
        self._no_probabilities = np.empty((1, q))

    def labels(self, codes):
        """The kernels' labels of class codes (n,), converted once per fit.

        int64 codes, except for a binary model whose kernel reads the
        probability of class 1 (see ``binary_indexed``): float64 codes.
        """
        indexed = self.q > 1 or binary_indexed(self.t2)
        dtype = np.int64 if indexed else np.float64
        return np.require(codes, dtype=dtype, requirements=["C", "A", "W"])

    def loss_grad(self, y, eta, w, rows):
        """Loss sum and gradient in eta (weights included) of rows ``rows`` (start, stop)."""
        start, stop = rows
        with serial_kernels():
            if self.q == 1:
                loss, dloss = self._binary(y, eta)
                return float(w @ loss), dloss * w
            loss, dloss = self._multiclass(y, eta, self.normalisers[start:stop], self.warm)
        return float(w @ loss), dloss * w[:, None]

    def value_grad(self, y, eta, w):
        """Loss sum and gradient in eta of one out-of-core block (raw encoded labels)."""
        y = self.labels(y)
        if self.q == 1:
            loss, dloss = self._binary(y, eta)
            return float(w @ loss), dloss * w
        loss, dloss = self._multiclass(y, eta, np.empty(eta.shape[0]), False)
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
