"""The shortened predict_proba paths give the values of their definitions.

Multiclass Laplace: the moderated softmax (pairwise form of Lu, Ie & Sha,
"Mean-field approximation to Gaussian-softmax integral with application to
uncertainty estimation", arXiv:2006.07584, 2020, with the variance of each
difference; formula in ``PosteriorPredictiveMixin._moderated_multiclass``)
written out with scipy.special.logsumexp from ``logit_moments``. Tempered:
the tempered softmax of the activations (Amid, Warmuth, Anil & Koren,
NeurIPS 2019), against the public function and, at t2 = 1, scipy's softmax.
"""

import numpy as np
import pytest
from scipy.special import expit, logsumexp, softmax
from sklearn.datasets import load_iris, load_wine
from sklearn.preprocessing import StandardScaler

from skbayeslogit import LaplaceLogisticClassifier, TemperedLogisticClassifier
from skbayeslogit.tempered_functions import tempered_softmax


def _standardised(loader):
    X, y = loader(return_X_y=True)
    return StandardScaler().fit_transform(X), y


@pytest.mark.parametrize("loader", [load_iris, load_wine])
def test_multiclass_predict_proba_is_the_pairwise_formula(loader):
    """predict_proba (exponentials of the normalised moderated log
    probabilities, renormalised) against the formula evaluated with
    logsumexp from the latent means and covariances. Each side is a few
    dozen rounded operations on O(1) values: 1e-12 relative leaves room
    for thousands of ulps."""
    X, y = _standardised(loader)
    model = LaplaceLogisticClassifier(prior_scale=2.0).fit(X, y)
    mean, cov = model.logit_moments(X)
    diag = np.einsum("nkk->nk", cov)
    s = np.maximum(diag[:, :, None] + diag[:, None, :] - 2.0 * cov, 0.0)
    diff = mean[:, :, None] - mean[:, None, :]
    logp = -logsumexp(-diff / np.sqrt(1.0 + np.pi * s / 8.0), axis=2)
    expected = np.exp(logp - logsumexp(logp, axis=1, keepdims=True))
    P = model.predict_proba(X)
    np.testing.assert_allclose(P, expected, rtol=1e-12, atol=1e-15)
    np.testing.assert_allclose(P.sum(axis=1), 1.0, rtol=0, atol=4 * np.finfo(float).eps)
    # decision_function still ranks as predict_proba (log of the same values).
    np.testing.assert_allclose(np.exp(model.decision_function(X)), P, rtol=1e-12)


@pytest.mark.parametrize(("loader", "t2"), [(load_iris, 1.2), (load_wine, 1.5)])
def test_tempered_predict_proba_is_the_tempered_softmax(loader, t2):
    """Multiclass and binary predict_proba equal the public tempered_softmax
    of the activations bit for bit (same normaliser, same kernels or numpy
    path for the same sizes)."""
    X, y = _standardised(loader)
    for labels in (y, (y == 1).astype(int)):
        model = TemperedLogisticClassifier(t1=0.8, t2=t2).fit(X, labels)
        a = model.decision_function(X)
        if a.ndim == 1:
            a = np.column_stack([np.zeros_like(a), a])
        np.testing.assert_array_equal(model.predict_proba(X), tempered_softmax(a, t2))


def test_tempered_predict_proba_at_t2_one_is_the_softmax():
    """At t1 = t2 = 1 the model is logistic regression: its probabilities are
    scipy's softmax (multiclass) and expit (binary) of the activations."""
    X, y = _standardised(load_wine)
    model = TemperedLogisticClassifier(t1=1.0, t2=1.0).fit(X, y)
    np.testing.assert_allclose(
        model.predict_proba(X), softmax(model.decision_function(X), axis=1), rtol=1e-12
    )
    binary = TemperedLogisticClassifier(t1=1.0, t2=1.0).fit(X, y == 1)
    np.testing.assert_allclose(
        binary.predict_proba(X)[:, 1], expit(binary.decision_function(X)), rtol=1e-12
    )


def test_tempered_predict_proba_reports_overflowing_activations():
    """Finite X within the input limit and finite coefficients can still
    overflow X @ coef_: a one-line error, not NaN probabilities."""
    X, y = _standardised(load_iris)
    model = TemperedLogisticClassifier().fit(X, y == 1)
    model.coef_ = np.full_like(model.coef_, 1e308)
    with pytest.raises(ValueError, match="overflow"):
        model.predict_proba(np.full((2, X.shape[1]), 10.0))


class _Recorder:
    """Stands in for a numba dispatcher: records the argument types of each call."""

    def __init__(self, signatures, stop=False):
        self.signatures = signatures
        self.stop = stop
        self.calls = []

    def __call__(self, *args):
        import numba

        self.calls.append(tuple(numba.typeof(a) for a in args))
        if self.stop:  # a fit's pass: end the fit there
            raise _Stop


class _Stop(Exception):
    pass


@pytest.mark.parametrize(("K", "t2"), [(2, 1.2), (2, 1.3), (4, 1.2)])
def test_cached_loss_is_loaded_with_the_argument_types_of_the_fit(monkeypatch, K, t2):
    """load_cached_loss calls the serial kernel that a fit's passes call, with
    the same numba argument types (so the fit then runs the loaded code and
    no second signature is compiled); it does nothing without a cached copy
    or below LOAD_MIN_ELEMENTS."""
    import time

    from skbayeslogit._kernels import tempered_dispatch as tk
    from skbayeslogit._kernels.config import serial_kernels

    q = 1 if K == 2 else K
    family = (
        ("blocked" if tk.binary_indexed(t2) else "binary") if q == 1 else tk._kernel_family(K, t2)  # noqa: SLF001 - the family the fit takes
    )
    loading = _Recorder([])
    monkeypatch.setitem(tk._LOSS_KERNELS, family, (loading, loading))
    monkeypatch.setattr(tk, "_on_disk", lambda dispatcher: dispatcher is loading)
    tk.load_cached_loss(q, 0.8, t2, 0.0, tk.LOAD_MIN_ELEMENTS - 1)
    time.sleep(0.2)
    assert loading.calls == []
    tk.load_cached_loss(q, 0.8, t2, 0.0, tk.LOAD_MIN_ELEMENTS)
    for _ in range(100):
        if loading.calls:
            break
        time.sleep(0.05)
    assert len(loading.calls) == 1
    # A fit's pass, with the kernel "compiled": the call the fit makes.
    passing = _Recorder([loading.calls[0]], stop=True)
    monkeypatch.setitem(tk._LOSS_KERNELS, family, (passing, passing))
    rng = np.random.default_rng(0)
    X = rng.normal(size=(6000, 3))
    y = rng.integers(0, K, size=6000)
    with serial_kernels(), pytest.raises(_Stop):
        TemperedLogisticClassifier(t1=0.8, t2=t2, start="zero").fit(X, y)
    assert passing.calls[0] == loading.calls[0]
    # Without a cached copy: nothing.
    monkeypatch.setattr(tk, "_on_disk", lambda dispatcher: False)
    idle = _Recorder([])
    monkeypatch.setitem(tk._LOSS_KERNELS, family, (idle, idle))
    tk.load_cached_loss(q, 0.8, t2, 0.0, tk.LOAD_MIN_ELEMENTS)
    time.sleep(0.2)
    assert idle.calls == []
