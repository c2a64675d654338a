"""The outcome of an approximation self-check: diagnostics and corrected summaries."""

import numpy as np
import pandas as pd

from .._checks.inputs import check_level
from .._linear.layout import ParameterLayout
from .convergence import chain_diagnostics
from .draw_likelihood import draw_matrix
from .weighted import weighted_moments, weighted_quantiles

_PREDICT_ENTRIES = 1 << 20  # rows x draws per block of predictions


class ApproximationCheck:
    """How far the Laplace posterior is from the exact one, and corrected summaries.

    Returned by ``check_approximation``; not built by hand. The corrected
    summaries come from weighted draws: Pareto-smoothed importance weights
    of draws from the Laplace Gaussian, or, after ``refine``, equally
    weighted sampler draws.

    Attributes
    ----------
    pareto_k : float
        Shape of the generalised Pareto fit to the largest importance
        ratios (exact posterior over Laplace Gaussian). Below ``threshold``
        the Laplace posterior is close enough for importance sampling to
        correct it; above 0.7 the two differ too much for that.
    ess : float
        Effective sample size of the corrected draws: 1 / sum(w^2) of the
        smoothed weights, or, after the sampler, the smallest bulk ESS
        over the parameters.
    threshold : float
        min(1 - 1 / log10(S), 0.7) for S importance draws.
    reliable : bool
        ``pareto_k < threshold``: the Laplace posterior agrees with the exact
        one (to within what the importance weights can correct).
    n_draws : int
        Draws behind the corrected summaries.
    method : str
        "importance sampling" or "sampler".
    mean_shift : pandas.Series
        (corrected mean - Laplace mean) / Laplace sd for each parameter.
    rhat, ess_bulk, ess_tail : pandas.Series or None
        Sampler only: rank-normalised split R-hat and bulk / tail effective
        sample sizes of each parameter.
    sampler_info : dict or None
        Sampler only: step size, acceptance rate, divergent trajectories,
        gradient passes, chains, warm-up and kept iterations a chain.
    verdict : str
        One or two plain sentences for a report's summary.
    draws : ndarray of shape (S, p)
    weights : ndarray of shape (S,)
    input_map : callable or None
        Applied to the X given to ``predict_proba`` and ``predict_interval``
        before the checked estimator sees it: a wrapper that checked its
        inner estimator on transformed features (standardised, encoded)
        sets it, so that predictions take the wrapper's own input.
    """

    def __init__(self, estimator, draws, weights, pareto_k, threshold, chains=None, info=None):
        self._estimator = estimator
        self.input_map = None
        self.draws = draws
        self.weights = weights
        self.pareto_k = float(pareto_k)
        self.threshold = float(threshold)
        self.reliable = bool(self.pareto_k < self.threshold)
        self.n_draws = len(draws)
        index = estimator._parameter_index()
        mean, _ = weighted_moments(draws, weights)
        sd = np.sqrt(np.maximum(np.diag(estimator.posterior_cov_), 0.0))
        with np.errstate(divide="ignore", invalid="ignore"):
            shift = np.where(sd > 0, (mean - estimator.posterior_mean_) / sd, 0.0)
        self.mean_shift = pd.Series(shift, index=index, name="mean_shift")
        self.sampler_info = info
        if chains is None:
            self.method = "importance sampling"
            self.ess = float(1.0 / np.sum(weights * weights))
            self.rhat = self.ess_bulk = self.ess_tail = None
        else:
            self.method = "sampler"
            rhat, bulk, tail = chain_diagnostics(chains)
            self.rhat = pd.Series(rhat, index=index, name="rhat")
            self.ess_bulk = pd.Series(bulk, index=index, name="ess_bulk")
            self.ess_tail = pd.Series(tail, index=index, name="ess_tail")
            self.ess = float(np.nanmin(self.ess_bulk)) if self.ess_bulk.notna().any() else np.nan
        self.verdict = self._verdict()

    def __repr__(self):
        return f"ApproximationCheck({self.verdict!r})"

    def _verdict(self):
        k = f"Pareto k = {self.pareto_k:.2f}"
        shift = float(np.max(np.abs(self.mean_shift))) if len(self.mean_shift) else 0.0
        moved = f"the largest change of a mean is {shift:.2f} posterior sd"
        if self.reliable and self.method != "sampler":
            return (
                f"The fast (Laplace) posterior agrees with the exact one: {k}, below the "
                f"threshold {self.threshold:.2f}; {moved}."
            )
        head = (
            f"The fast (Laplace) posterior does not match the exact one: {k}, above the "
            f"threshold {self.threshold:.2f}"
            if not self.reliable
            else f"The fast (Laplace) posterior agrees with the exact one ({k})"
        )
        if self.method != "sampler":
            return (
                f"{head}; its intervals are not to be trusted and importance weights cannot "
                "correct them. Rerun the check with refine=True for sampler-based intervals."
            )
        worst = float(np.nanmax(self.rhat)) if self.rhat.notna().any() else np.nan
        text = (
            f"{head}; intervals are corrected by a sampler ({self.sampler_info['chains']} "
            f"chains, largest R-hat {worst:.3f}, smallest bulk ESS {self.ess:.0f}); {moved}."
        )
        if not worst < 1.01:
            text += (
                " The sampler has not converged (R-hat >= 1.01): treat its intervals with care."
            )
        return text

    # -- corrected summaries ------------------------------------------------
    def coef_table(self, level=0.9):
        """Posterior summary of every parameter from the corrected draws.

        Same index and columns as the estimator's ``coef_table``:
        ``estimate`` (weighted posterior mean), ``sd``, ``lower`` and
        ``upper`` (equal-tailed weighted quantiles at ``level``) and
        ``sign_prob`` (weighted share of draws with the sign of the
        estimate).
        """
        level = check_level(level)
        mean, sd = weighted_moments(self.draws, self.weights)
        alpha = (1.0 - level) / 2.0
        lower, upper = weighted_quantiles(self.draws.T, self.weights, [alpha, 1.0 - alpha])
        same_sign = np.sign(self.draws) == np.sign(mean)
        table = pd.DataFrame(
            {
                "estimate": mean,
                "sd": sd,
                "lower": lower,
                "upper": upper,
                "sign_prob": np.dot(self.weights, same_sign),
            },
            index=self._estimator._parameter_index(),
        )
        table.attrs["level"] = level
        return table

    def _latent_blocks(self, X):
        """(start, stop, eta, n) over row blocks of X's n rows; eta (m, S) or (m, S, K)."""
        est = self._estimator
        if self.input_map is not None:
            X = self.input_map(X)
        X = est._validate_predict_data(X)
        layout = ParameterLayout.of_estimator(est)
        q, S = layout.q, self.n_draws
        B, b = draw_matrix(layout, self.draws)
        rows = max(1, _PREDICT_ENTRIES // (S * q))
        for start in range(0, X.shape[0], rows):
            stop = min(start + rows, X.shape[0])
            E = np.dot(X[start:stop], B) + b
            yield start, stop, (E if q == 1 else E.reshape(stop - start, S, q)), X.shape[0]

    def _class_probs(self, E):
        if E.ndim == 2:
            return self._estimator._binary_link(E)
        P = np.exp(E - E.max(axis=2, keepdims=True))
        return P / P.sum(axis=2, keepdims=True)

    def predict_proba(self, X):
        """Posterior predictive class probabilities from the corrected draws, (n, K)."""
        out = None
        for start, stop, E, n in self._latent_blocks(X):
            if out is None:
                out = np.empty((n, len(self._estimator.classes_)))
            P = self._class_probs(E)
            if E.ndim == 2:
                out[start:stop, 1] = np.dot(P, self.weights)
                out[start:stop, 0] = 1.0 - out[start:stop, 1]
            else:
                out[start:stop] = np.einsum("msk,s->mk", P, self.weights)
        return out if out is not None else np.empty((0, len(self._estimator.classes_)))

    def predict_interval(self, X, level=0.9):
        """Equal-tailed bounds of P(y = class | x) from the corrected draws.

        Binary: shape (n,) each, bounds for ``classes_[1]`` (quantiles of the
        latent predictor mapped by the link, which is monotone).
        Multiclass: shape (n, K) each.
        """
        level = check_level(level)
        alpha = (1.0 - level) / 2.0
        probs = [alpha, 1.0 - alpha]
        lower = upper = None
        for start, stop, E, n in self._latent_blocks(X):
            if E.ndim == 2:
                if lower is None:
                    lower, upper = np.empty(n), np.empty(n)
                lo, hi = weighted_quantiles(E, self.weights, probs)
                lower[start:stop] = self._estimator._binary_link(lo)
                upper[start:stop] = self._estimator._binary_link(hi)
            else:
                m, K = stop - start, E.shape[2]
                if lower is None:
                    lower, upper = np.empty((n, K)), np.empty((n, K))
                P = self._class_probs(E).transpose(0, 2, 1).reshape(m * K, -1)
                lo, hi = weighted_quantiles(P, self.weights, probs)
                lower[start:stop], upper[start:stop] = lo.reshape(m, K), hi.reshape(m, K)
        return lower, upper
