"""The tempered functions of the public API, with their input checks.

Tempered logarithm and exponential, the tempered softmax and its
normaliser, and the bi-tempered logistic loss with its gradient: Amid,
Warmuth, Anil & Koren, "Robust Bi-Tempered Logistic Loss Based on Bregman
Divergences", NeurIPS 2019.  The maths and the algorithms are described in
the kernel modules (:mod:`skbayeslogit._kernels.tempered_math` and the
modules it names); these functions check and convert their input (one-line
errors naming the argument) and launch the kernels.
"""

from __future__ import annotations

import numpy as np

from ._checks.tempered_arrays import (
    T_MAX,
    as_activations,
    as_float_c,
    as_labels,
    check_finite,
    check_scalar,
)
from ._kernels.tempered_dispatch import (
    binary_indexed,
    binary_loss,
    multiclass_loss,
    normalise,
    probabilities,
)

__all__ = [
    "log_t",
    "exp_t",
    "tempered_softmax",
    "tempered_normaliser",
    "tempered_sigmoid",
    "bitempered_loss",
    "bitempered_loss_binary",
    "bitempered_loss_warm",
]


def log_t(u, t):
    """Tempered logarithm ``log_t(u) = (u**(1 - t) - 1) / (1 - t)``.

    Amid, Warmuth, Anil & Koren, "Robust Bi-Tempered Logistic Loss Based on
    Bregman Divergences", NeurIPS 2019, section 2.

    Parameters
    ----------
    u : array_like of float, any shape
        Arguments, ``u >= 0`` (``log_t(0) = -1 / (1 - t)`` for ``t < 1`` and
        ``-inf`` for ``t >= 1``).  NaN propagates.
    t : float in [0, 10]
        Temperature; ``t = 1`` is exactly :func:`numpy.log`.

    Returns
    -------
    out : ndarray of float64, shape of `u` (a float for scalar input)
        Computed as ``expm1((1 - t) log u) / (1 - t)``, accurate as t -> 1.

    Raises
    ------
    ValueError
        If any ``u < 0`` or `t` is outside [0, 10].
    """
    t = check_scalar("t", t, 0.0, T_MAX)
    u = np.asarray(u, dtype=np.float64)
    if np.any(u < 0):
        raise ValueError("log_t is defined for u >= 0 only")
    with np.errstate(divide="ignore"):
        lu = np.log(u)
    out = lu if t == 1.0 else np.expm1((1.0 - t) * lu) / (1.0 - t)
    return out[()] if out.ndim == 0 else out


def exp_t(u, t):
    """Tempered exponential ``exp_t(u) = [1 + (1 - t) u]_+ ** (1 / (1 - t))``.

    Amid, Warmuth, Anil & Koren, "Robust Bi-Tempered Logistic Loss Based on
    Bregman Divergences", NeurIPS 2019, section 2.

    Parameters
    ----------
    u : array_like of float, any shape
        Arguments.  NaN propagates.
    t : float in [0, 10]
        Temperature; ``t = 1`` is exactly :func:`numpy.exp`.  For ``t < 1`` the
        result is 0 where ``u <= -1 / (1 - t)`` (finite support).  For ``t > 1``
        there is a pole at ``u = 1 / (t - 1)``: the result grows without bound
        as u approaches it from below and is ``+inf`` at and beyond it (the
        clipped base is 0, raised to a negative power).  The tempered softmax
        never gets there, since it evaluates ``exp_t`` at shifted activations
        ``<= 0``.

    Returns
    -------
    out : ndarray of float64, shape of `u` (a float for scalar input)
        Computed as ``exp(log1p((1 - t) u) / (1 - t))``, accurate as t -> 1.

    Raises
    ------
    ValueError
        If `t` is outside [0, 10].
    """
    t = check_scalar("t", t, 0.0, T_MAX)
    u = np.asarray(u, dtype=np.float64)
    with np.errstate(over="ignore", invalid="ignore", divide="ignore"):
        if t == 1.0:
            out = np.exp(u)
        else:
            z = (1.0 - t) * u
            inside = z > -1.0
            out = np.exp(np.log1p(np.where(inside, z, 0.0)) / (1.0 - t))
            out = np.where(inside, out, 0.0 if t < 1.0 else np.inf)
            out = np.where(np.isnan(u), np.nan, out)
    return out[()] if out.ndim == 0 else out


def tempered_normaliser(activations, t):
    """Normaliser ``lambda`` of the tempered softmax, one per row.

    ``lambda`` solves ``sum_i exp_t(a_i - lambda) = 1`` (Amid, Warmuth, Anil &
    Koren, NeurIPS 2019, section 3); the algorithm is described in
    :mod:`skbayeslogit._kernels.tempered_rows`.  ``lambda(a + c) = lambda(a) + c``;
    at ``t = 1`` it is the log-sum-exp.

    Parameters
    ----------
    activations : array_like of float, shape (n, K) or (K,)
        Finite activations; a 1-D array is one row.  K >= 1.
    t : float in [0, 10]
        Temperature of the tempered exponential.

    Returns
    -------
    lam : ndarray of float64, shape (n,) (a float for 1-D input)

    Raises
    ------
    ValueError
        If the activations contain NaN or infinite values, are not 1-D or
        2-D, or `t` is outside [0, 10].
    """
    a, one_row = as_activations(activations)
    t = check_scalar("t", t, 0.0, T_MAX)
    lam = np.empty(a.shape[0])
    normalise(a, t, np.empty((1, 1)), lam, False)
    return float(lam[0]) if one_row else lam


def tempered_softmax(activations, t):
    """Tempered softmax ``p_i = exp_t(a_i - lambda(a))`` of each row.

    Amid, Warmuth, Anil & Koren, "Robust Bi-Tempered Logistic Loss Based on
    Bregman Divergences", NeurIPS 2019, section 3.  ``t = 1`` is the ordinary
    softmax; ``t > 1`` has heavier (polynomial) tails; ``t < 1`` has finite
    support and ``t = 0`` is sparsemax (Martins & Astudillo, ICML 2016).

    Parameters
    ----------
    activations : array_like of float, shape (n, K) or (K,)
        Finite activations; a 1-D array is one row.  K >= 1.
    t : float in [0, 10]
        Temperature.

    Returns
    -------
    p : ndarray of float64, shape of `activations`
        Rows in [0, 1] that sum to 1 within ``4 eps (sqrt(K) + 1)`` (checked
        to 1e-12 for K up to 50,000, t in (0, 5], activations up to 1e3).
        Never NaN.  Invariant under adding a constant to a row.

    Raises
    ------
    ValueError
        If the activations contain NaN or infinite values, are not 1-D or
        2-D, or `t` is outside [0, 10].
    """
    a, one_row = as_activations(activations)
    t = check_scalar("t", t, 0.0, T_MAX)
    p = probabilities(a, t)
    return p[0] if one_row else p


def tempered_sigmoid(activations, t):
    """Probability of class 1 under the tempered softmax of ``(0, a)``.

    The binary model's probability: ``tempered_softmax([0, a], t)[1]`` for
    each entry ``a``; ``t = 1`` is the logistic sigmoid.

    Parameters
    ----------
    activations : array_like of float, shape (n,)
        Finite class-1 activations (class 0 has activation 0).
    t : float in [0, 10]
        Temperature.

    Returns
    -------
    p1 : ndarray of float64, shape (n,), values in [0, 1]
    """
    a = np.asarray(activations, dtype=np.float64)
    if a.ndim != 1:
        raise ValueError(f"activations must be 1-D, got {a.ndim}-D")
    pairs = np.zeros((a.shape[0], 2))
    pairs[:, 1] = a
    return tempered_softmax(pairs, t)[:, 1].copy()


def bitempered_loss(activations, labels, t1, t2, label_smoothing=0.0):
    """Bi-tempered logistic loss per row and its gradient w.r.t. activations.

    The Bregman form of Amid, Warmuth, Anil & Koren, "Robust Bi-Tempered
    Logistic Loss Based on Bregman Divergences", NeurIPS 2019, section 4::

        L = sum_i [ y_i (log_t1 y_i - log_t1 p_i)
                    - (y_i**(2 - t1) - p_i**(2 - t1)) / (2 - t1) ],
        p = tempered_softmax(activations, t2).

    ``t1 = t2 = 1`` is the cross-entropy with gradient ``p - y``.  For
    ``t1 < 1`` the loss is bounded: ``0 <= L <= 1 / (1 - t1)`` for every
    probability label (the supremum is approached when the true class gets
    probability 0 and another class takes all the mass).

    Parameters
    ----------
    activations : array_like of float, shape (n, K) or (K,)
        Finite activations; a 1-D array is one row.  K >= 1.
    labels : array_like
        Class indices, shape (n,) (a scalar for 1-D activations), integers in
        [0, K - 1]; or probability rows, shape (n, K) ((K,) for 1-D
        activations), entries >= 0 summing to 1.
    t1 : float in [0, 1]
        Temperature of the logarithm (``t1 < 1``: bounded loss).  Values above
        1 make the loss unbounded and grow faster than the cross-entropy, the
        opposite of the method's purpose, and are rejected.
    t2 : float in [0, 10]
        Temperature of the softmax (``t2 > 1``: heavy tails).  For ``t2 < 1``
        classes can have probability exactly 0; then ``t1 = 1`` gives an
        infinite loss for a true class outside the support (never NaN).
    label_smoothing : float in [0, 1], default=0.0
        ``y <- (1 - label_smoothing) y + label_smoothing / K``.

    Returns
    -------
    loss : ndarray of float64, shape (n,) (a float for 1-D activations)
        Per-row loss, >= 0.
    grad : ndarray of float64, shape (n, K) ((K,) for 1-D activations)
        ``d loss_r / d activations[r, j]``; rows sum to 0.

    Raises
    ------
    ValueError
        NaN or infinite activations or labels, labels out of range or of the
        wrong shape, or a temperature / smoothing outside its range.
    """
    a, one_row = as_activations(activations)
    loss, grad = _multiclass_loss(a, labels, one_row, t1, t2, label_smoothing, None, False)
    if one_row:
        return float(loss[0]), grad[0]
    return loss, grad


def _multiclass_loss(a, labels, one_row, t1, t2, label_smoothing, normalisers, warm):
    """Validate the rest and run the loss kernel on activations `a` (n, K).

    `normalisers`: None, or an (n,) float64 C-contiguous writeable array of
    absolute normalisers, read as Newton's starting points when `warm` and
    overwritten with the new ones.
    """
    n, k = a.shape
    t1 = check_scalar("t1", t1, 0.0, 1.0)
    t2 = check_scalar("t2", t2, 0.0, T_MAX)
    ls = check_scalar("label_smoothing", label_smoothing, 0.0, 1.0)
    idx, yprob = as_labels(labels, n, k, one_row)
    use_index = idx is not None
    if use_index:
        yprob = np.empty((1, k))
    else:
        idx = np.zeros(1, dtype=np.int64)
    if normalisers is None:
        warm = False
        normalisers = np.empty(n)
    loss = np.empty(n)
    grad = np.empty_like(a)
    multiclass_loss(a, idx, yprob, use_index, t1, t2, ls, bool(warm), normalisers, loss, grad)
    return loss, grad


def bitempered_loss_warm(activations, labels, t1, t2, label_smoothing, normalisers, warm):
    """:func:`bitempered_loss` for 2-D activations, reusing normalisers.

    An optimiser evaluates the loss at a sequence of nearby parameters; each
    row's tempered-softmax normaliser moves little between them, and Newton
    started at the previous value needs about half the passes of a cold
    start (and no fixed-point phase).  The result differs from a cold start
    by no more than the solver's stopping tolerance.

    Parameters
    ----------
    activations, labels, t1, t2, label_smoothing
        As :func:`bitempered_loss`; `activations` must be 2-D (n, K).
    normalisers : ndarray of float64, shape (n,), C-contiguous, writeable
        Absolute normalisers of a previous call on nearby activations (read
        only when `warm`); overwritten with this call's.
    warm : bool
        Whether `normalisers` holds starting points.

    Returns
    -------
    loss : ndarray of float64, shape (n,)
    grad : ndarray of float64, shape (n, K)
    """
    a, one_row = as_activations(activations)
    if one_row:
        raise ValueError("bitempered_loss_warm needs 2-D activations (n, K)")
    lam = normalisers
    if not (
        isinstance(lam, np.ndarray)
        and lam.dtype == np.float64
        and lam.shape == (a.shape[0],)
        and lam.flags.c_contiguous
        and lam.flags.writeable
    ):
        raise ValueError(
            f"normalisers must be a writeable C-contiguous float64 array of shape ({a.shape[0]},)"
        )
    return _multiclass_loss(a, labels, False, t1, t2, label_smoothing, lam, warm)


def bitempered_loss_binary(activations, labels, t1, t2, label_smoothing=0.0):
    """Bi-tempered loss of the binary model with activations ``(0, a)``.

    Equal to ``bitempered_loss(column_stack([0, a]), [1 - y, y], ...)``: for
    an integer ``1 / (1 - t2)`` it is computed that way by the vectorised
    block solver, reading the pairs straight from `a`, otherwise by scalar
    code per row; see
    :func:`bitempered_loss` for the loss (Amid, Warmuth, Anil & Koren,
    NeurIPS 2019).

    Parameters
    ----------
    activations : array_like of float, shape (n,)
        Finite class-1 activations ``a`` (class 0 has activation 0).
    labels : array_like of float, shape (n,)
        Probability of class 1, in [0, 1] (0/1 for hard labels).
    t1 : float in [0, 1]
    t2 : float in [0, 10]
    label_smoothing : float in [0, 1], default=0.0
        ``y <- (1 - label_smoothing) y + label_smoothing / 2`` per class.

    Returns
    -------
    loss : ndarray of float64, shape (n,)
        Per-row loss, >= 0.
    dloss_da : ndarray of float64, shape (n,)
        Derivative of each row's loss w.r.t. its activation ``a``.

    Raises
    ------
    ValueError
        As :func:`bitempered_loss`; labels outside [0, 1].
    """
    a = np.asarray(activations)
    if a.dtype.kind not in "biuf":
        raise TypeError(f"activations must be real numbers, got dtype {a.dtype}")
    if a.ndim != 1:
        raise ValueError(f"activations must be 1-D, shape (n,), got {a.ndim}-D")
    a = as_float_c(a)
    check_finite("activations", a)
    y = np.asarray(labels)
    if y.dtype.kind not in "biuf":
        raise TypeError(f"labels must be numbers, got dtype {y.dtype}")
    y = as_float_c(y)
    if y.shape != a.shape:
        raise ValueError(f"labels must have shape {a.shape}, got {y.shape}")
    check_finite("labels", y)
    if np.any((y < 0) | (y > 1)):
        raise ValueError("binary labels must be in [0, 1]")
    t1 = check_scalar("t1", t1, 0.0, 1.0)
    t2 = check_scalar("t2", t2, 0.0, T_MAX)
    ls = check_scalar("label_smoothing", label_smoothing, 0.0, 1.0)
    # 0/1 labels without smoothing also get the block solver's rational
    # unlabelled-class terms.
    if binary_indexed(t2) and ls == 0.0 and bool(np.all((y == 0.0) | (y == 1.0))):
        y = y.astype(np.int64)
    loss = np.empty(a.shape[0])
    grad = np.empty(a.shape[0])
    binary_loss(a, y, t1, t2, ls, loss, grad)
    return loss, grad
