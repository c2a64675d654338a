"""The blocked data passes against the textbook formulas, computed directly.

References: the logistic and softmax log-likelihoods, gradients and Hessians
of Bishop, Pattern Recognition and Machine Learning (2006), eqs. 4.90-4.97
(binary) and 4.108-4.110 (softmax, the Hessian blocks
sum_n y_nk (I_kj - y_nj) phi_n phi_n^T), evaluated here with
scipy.special's log_expit / log_softmax and dense numpy products over all
rows at once. The passes instead work in row blocks, tasks and sub-blocks,
on worker threads, with a packed class-pair layout for K > 2; the sizes
below make every one of those splits uneven.

Tolerance: every entry is a sum of n = 3,001 products of O(1) factors,
summed in a different order on each side, so the two agree to a few
n * eps relative to the largest entry; 1e-12 is ~1,500 eps and fails on
any wrong index, weight or missing term.
"""

import numpy as np
import pytest
from scipy.special import expit, log_expit, log_softmax, softmax

from skbayeslogit._fit.likelihoods import BinaryLogistic, MultinomialLogistic
from skbayeslogit._linear import design as _design
from skbayeslogit._linear import threads as _threads
from skbayeslogit._linear.design import LinearDesign
from skbayeslogit._linear.threads import passes_own_threads

RTOL = 1e-12


def _data(n, d, K, seed=0):
    rng = np.random.default_rng(seed)
    X = rng.normal(size=(n, d))
    y = rng.integers(0, K, size=n)
    w = rng.uniform(0.2, 3.0, size=n)
    return X, y, w


def _close(actual, expected):
    scale = float(np.max(np.abs(expected)))
    np.testing.assert_allclose(actual, expected, rtol=0, atol=RTOL * scale)


def _assert_passes(full, gradient_only, reference):
    """Both passes against (loss, grad, hess, eta) computed directly."""
    loss_ref, grad_ref, hess_ref, eta_ref = reference
    loss, grad, hess, eta = full
    loss_g, grad_g, eta_g = gradient_only
    _close(eta, eta_ref)
    _close(eta_g, eta_ref)
    np.testing.assert_allclose([loss, loss_g], [loss_ref, loss_ref], rtol=RTOL)
    _close(grad, grad_ref)
    _close(grad_g, grad_ref)
    _close(hess, hess_ref)
    np.testing.assert_array_equal(hess, hess.T)


@pytest.fixture(params=[False, True], ids=["serial", "threads"])
def threaded(request, monkeypatch):
    """Run the passes in the calling thread, or force tasks onto workers."""
    if request.param:
        monkeypatch.setattr(_threads, "_SERIAL_WORK", 0.0)
    return request.param


@pytest.mark.parametrize("fit_intercept", [True, False])
@pytest.mark.parametrize("order", ["C", "F"])
def test_binary_pass_matches_direct_formula(fit_intercept, order, threaded):
    """C-ordered X on worker threads takes the span gradient pass; serial passes
    and F-ordered X take the blocks."""
    n, d = 3_001, 7
    X, y, w = _data(n, d, 2)
    design = LinearDesign(np.asarray(X, order=order), 1, fit_intercept, block_rows=97)
    theta = np.random.default_rng(1).normal(scale=0.5, size=design.p_full)
    with passes_own_threads():
        full = design.loss_grad_hess(BinaryLogistic(), y.astype(float), w, theta)
        gradient_only = design.loss_grad(BinaryLogistic(), y.astype(float), w, theta)

    Xt = np.column_stack([X, np.ones(n)]) if fit_intercept else X
    eta_ref = Xt @ theta
    p = expit(eta_ref)
    loss_ref = -np.sum(w * np.where(y == 1, log_expit(eta_ref), log_expit(-eta_ref)))
    grad_ref = Xt.T @ (w * (p - y))
    hess_ref = Xt.T @ ((w * p * (1 - p))[:, None] * Xt)

    _assert_passes(full, gradient_only, (loss_ref, grad_ref, hess_ref, eta_ref))


@pytest.mark.parametrize(("K", "fit_intercept"), [(3, True), (5, True), (4, False)])
def test_multiclass_pass_matches_direct_formula(K, fit_intercept, threaded):
    n, d = 3_001, 6
    X, y, w = _data(n, d, K)
    design = LinearDesign(X, K, fit_intercept, block_rows=97)
    theta = np.random.default_rng(2).normal(scale=0.7, size=design.p_full)
    lik = MultinomialLogistic(K)
    with passes_own_threads():
        full = design.loss_grad_hess(lik, y, w, theta)
        gradient_only = design.loss_grad(lik, y, w, theta)

    W = theta[: K * d].reshape(K, d)
    b = theta[K * d :] if fit_intercept else np.zeros(K)
    eta_ref = X @ W.T + b
    P = softmax(eta_ref, axis=1)
    Y = np.eye(K)[y]
    loss_ref = -np.sum(w * log_softmax(eta_ref, axis=1)[np.arange(n), y])
    G = w[:, None] * (P - Y)  # (n, K)
    grad_ref = (G.T @ X).ravel()
    if fit_intercept:
        grad_ref = np.concatenate([grad_ref, G.sum(axis=0)])
    # Parameter (k, a) for a column a of X, then the intercept of class k.
    Xt = np.column_stack([X, np.ones(n)]) if fit_intercept else X
    index = [
        np.r_[k * d + np.arange(d), [K * d + k] if fit_intercept else []].astype(int)
        for k in range(K)
    ]
    hess_ref = np.empty((design.p_full, design.p_full))
    for k in range(K):
        for j in range(K):
            r = w * P[:, k] * ((k == j) - P[:, j])
            hess_ref[np.ix_(index[k], index[j])] = Xt.T @ (r[:, None] * Xt)

    _assert_passes(full, gradient_only, (loss_ref, grad_ref, hess_ref, eta_ref))


def test_softmax_packed_hessian_factor_is_the_upper_triangle():
    """h of the softmax likelihood: the k <= l entries of w (diag p - p p^T)."""
    K, n = 6, 50
    rng = np.random.default_rng(3)
    eta = rng.normal(scale=3.0, size=(n, K))
    y = rng.integers(0, K, size=n)
    w = rng.uniform(0.5, 2.0, size=n)
    lik = MultinomialLogistic(K)
    loss, g, h = lik.derivatives(y, eta, w)
    P = softmax(eta, axis=1)
    outer = P[:, :, None] * P[:, None, :]
    full = w[:, None, None] * (np.einsum("nk,kl->nkl", P, np.eye(K)) - outer)
    k, l = np.triu_indices(K)
    np.testing.assert_allclose(h, full[:, k, l], rtol=1e-13, atol=1e-16)
    np.testing.assert_allclose(g, w[:, None] * (P - np.eye(K)[y]), rtol=1e-13, atol=1e-16)
    np.testing.assert_allclose(loss, lik.loss(y, eta, w), rtol=1e-14)
    log_p = log_softmax(eta, axis=1)[np.arange(n), y]
    np.testing.assert_allclose(loss, -np.sum(w * log_p), rtol=1e-14)


def test_one_compiled_signature_per_kernel(monkeypatch):
    """Writable, read-only and pandas inputs all reach the same machine code."""
    import pandas as pd

    from skbayeslogit import LaplaceLogisticClassifier
    from skbayeslogit._kernels import config as _kernel_config
    from skbayeslogit._kernels import logistic as lk
    from skbayeslogit._kernels import moments as mk
    from skbayeslogit._kernels import softmax as sk

    # 12,000 rows: enough for the subsample start, so that the gradient-only
    # passes (gradient_span) run too; in several tasks on worker threads, so
    # that its compiled version does.
    monkeypatch.setattr(_threads, "_SERIAL_WORK", 0.0)
    monkeypatch.setattr(_design, "_BLOCK_BYTES", 1 << 14)
    # Every call to the kernels, not their numpy paths for small calls.
    monkeypatch.setattr(_kernel_config, "NUMPY_MAX_ELEMENTS", 0)
    n = 12_000
    rng = np.random.default_rng(4)
    X = rng.normal(size=(n, 3))
    for K in (2, 3):
        y = rng.integers(0, K, size=n)
        w = rng.uniform(0.5, 2.0, size=n)
        frozen = [a.copy() for a in (X, y, w)]
        for a in frozen:
            a.setflags(write=False)
        for args in ((X, y, w), frozen, (pd.DataFrame(X), pd.Series(y).astype(str), w)):
            model = LaplaceLogisticClassifier(prior_scale=1.0)
            model.fit(*args[:2], sample_weight=args[2])
            model.predict_proba(args[0])
    dispatchers = [lk._pointwise_kernel.dispatcher(), lk._span_kernel.dispatcher()]
    dispatchers += [sk._softmax_rows, sk._pack_outer, mk._moments_kernel.dispatcher()]
    dispatchers += [sk._moderated_shifted, sk._moderated_finish]
    for dispatcher in dispatchers:
        assert dispatcher is not None and len(dispatcher.signatures) == 1, dispatcher


def _posterior(p, seed):
    """A Gaussian posterior with a random, well-conditioned precision (p x p)."""
    from skbayeslogit._fit.posterior import GaussianPosterior

    rng = np.random.default_rng(seed)
    A = rng.normal(size=(p, p))
    precision = A @ A.T + p * np.eye(p)
    return GaussianPosterior(rng.normal(size=p), np.linalg.cholesky(precision))


@pytest.mark.parametrize("fit_intercept", [True, False])
@pytest.mark.parametrize("d", [1, 7, 30])
def test_binary_moments_match_the_definition(fit_intercept, d, threaded):
    """mean = m^T x~ and var = x~^T Sigma x~ for every row, with Sigma =
    H^{-1} formed by numpy's inverse; 70,001 rows make uneven pieces and
    tasks, and d = 1, 7, 30 cover each remainder of the kernel's groups of
    four columns. Each value is a sum of at most 31 (mean) or 31^2 (var,
    on this side) terms: 1e-12 of the largest is ~4,500 eps."""
    n = 70_001
    post = _posterior(d + int(fit_intercept), seed=d)
    X = np.random.default_rng(1).normal(size=(n, d))
    X_tilde = np.hstack([X, np.ones((n, 1))]) if fit_intercept else X
    sigma = np.linalg.inv(post.chol @ post.chol.T)
    design = LinearDesign(np.empty((0, d)), 1, fit_intercept)
    pieces = []
    mean, var, in_range = post.binary_moments(
        design, X, limit=1e10, chunk=lambda m, v, a, b: pieces.append((a, b))
    )
    assert in_range
    _close(mean, X_tilde @ post.mean)
    _close(var, np.einsum("ij,jk,ik->i", X_tilde, sigma, X_tilde))
    # Every row finished exactly once.
    covered = np.zeros(n, dtype=int)
    for a, b in pieces:
        covered[a:b] += 1
    np.testing.assert_array_equal(covered, 1)


@pytest.mark.parametrize("value", [np.nan, np.inf, -np.inf, 2e10])
def test_binary_moments_flag_bad_values_and_skip_their_piece(value, threaded):
    """A NaN, an infinity or a value beyond the limit, in the last row, is
    reported; its piece is not handed to ``chunk``, the others are."""
    from skbayeslogit._fit.posterior import _FINISH_ROWS

    d, n = 4, 3 * _FINISH_ROWS + 5
    post = _posterior(d + 1, seed=3)
    X = np.random.default_rng(2).normal(size=(n, d))
    design = LinearDesign(np.empty((0, d)), 1, True)
    X[-1, 2] = value
    finished = []
    _, _, in_range = post.binary_moments(
        design, X, limit=1e10, chunk=lambda m, v, a, b: finished.append((a, b))
    )
    assert not in_range
    covered = np.zeros(n, dtype=int)
    for a, b in finished:
        covered[a:b] += 1
    # The rows before the last piece, each once; none of the last piece.
    missing = np.flatnonzero(covered == 0)
    assert missing[-1] == n - 1 and len(missing) <= _FINISH_ROWS
    np.testing.assert_array_equal(np.diff(missing), 1)
    assert covered.max() == 1


@pytest.mark.parametrize("fit_intercept", [True, False])
@pytest.mark.parametrize(("K", "d"), [(3, 1), (4, 6)])
def test_multiclass_moments_match_the_definition(K, d, fit_intercept, threaded):
    """Mean m_k = w_k^T x + b_k and Cov(eta_k, eta_l) = J_k(x) Sigma J_l(x)^T
    for every row, with Sigma = T H^{-1} T^T formed by numpy's inverse and
    T a zero-sum map of the intercepts (as a fit without an intercept prior
    makes); 5,001 rows make uneven pieces. Sums of at most (K d + K)^2
    O(1) terms: 1e-12 of the largest is thousands of eps."""
    from skbayeslogit._fit.posterior import GaussianPosterior
    from skbayeslogit._linear.layout import zero_sum_basis as _zero_sum_basis

    n = 5_001
    rng = np.random.default_rng(K + d)
    nc = K * d
    p_full = nc + (K if fit_intercept else 0)
    if fit_intercept:
        T = np.zeros((p_full, nc + K - 1))
        T[:nc, :nc] = np.eye(nc)
        T[nc:, nc:] = _zero_sum_basis(K)
    else:
        T = None
    p_free = p_full if T is None else T.shape[1]
    A = rng.normal(size=(p_free, p_free))
    chol = np.linalg.cholesky(A @ A.T + p_free * np.eye(p_free))
    theta = rng.normal(size=p_free) if T is None else T @ rng.normal(size=p_free)
    post = GaussianPosterior(theta, chol, T)
    X = rng.normal(size=(n, d))
    design = LinearDesign(np.empty((0, d)), K, fit_intercept)
    mean, cov = post.latent_moments(design, X)

    sigma_free = np.linalg.inv(chol @ chol.T)
    sigma = sigma_free if T is None else T @ sigma_free @ T.T
    # J(x): (K, p_full), row k picks class k's slopes (and intercept).
    J = np.zeros((n, K, p_full))
    for k in range(K):
        J[:, k, k * d : (k + 1) * d] = X
        if fit_intercept:
            J[:, k, nc + k] = 1.0
    _close(mean, J @ theta)
    _close(cov, np.einsum("nkp,pq,nlq->nkl", J, sigma, J))


def test_moderated_softmax_rows_match_the_formula():
    """The compiled moderated predictive against the formula written out with
    scipy.special.logsumexp (Lu, Ie & Sha 2020, pairwise form with the
    variance of each difference), on random means and covariances, and
    finite, normalised output when the means differ by 1e3."""
    from scipy.special import logsumexp

    from skbayeslogit._kernels.softmax import moderated_softmax_rows

    rng = np.random.default_rng(5)
    m, K = 777, 5
    A = rng.normal(size=(m, K, K))
    cov = np.einsum("nij,nkj->nik", A, A)
    ku, lu = np.triu_indices(K)
    pairs = cov[:, ku, lu]
    for spread in (3.0, 1e3):
        mean = rng.normal(size=(m, K)) * spread
        out = np.empty((m, K))
        moderated_softmax_rows(mean, pairs, out)
        diag = np.einsum("nkk->nk", cov)
        s = np.maximum(diag[:, :, None] + diag[:, None, :] - 2.0 * cov, 0.0)
        diff = mean[:, :, None] - mean[:, None, :]
        logp = -logsumexp(-diff / np.sqrt(1.0 + np.pi * s / 8.0), axis=2)
        expected = logp - logsumexp(logp, axis=1, keepdims=True)
        np.testing.assert_allclose(out, expected, rtol=1e-12, atol=1e-12 * spread)
        assert np.all(np.isfinite(out))
        np.testing.assert_allclose(np.exp(out).sum(axis=1), 1.0, rtol=1e-13)
