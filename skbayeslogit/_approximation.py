"""``check_approximation``: is the Laplace posterior close to the exact one?

A mixin for the estimators with a Gaussian (Laplace) posterior. It draws
from that Gaussian, weighs each draw by the exact unnormalised posterior
over the Gaussian density, and smooths the largest weights with a
generalised Pareto fit: Pareto-smoothed importance sampling (Vehtari,
Simpson, Gelman, Yao & Gabry, JMLR 25, 2024). The fitted shape k says how
far the two posteriors are apart; the weighted draws give corrected
summaries. With ``refine``, an unreliable check is followed by Hamiltonian
Monte Carlo preconditioned by the Laplace posterior (``_fit.hmc``).

The check is conditional on the fitted prior scale (``prior_scale_``, the
evidence maximiser under ``"auto"``), which it treats as fixed.
"""

import numpy as np
from sklearn.utils.validation import check_is_fitted

from ._checks.inputs import codes_in_classes, row_weights
from ._checks.params import Options, ParameterTable, PositiveInt, RandomState, as_generator
from ._fit.approximation_check import ApproximationCheck
from ._fit.draw_likelihood import DrawLikelihood
from ._fit.hmc import run_chains
from ._fit.importance_target import WhitenedPosterior
from ._fit.pareto import pareto_smooth, sample_size_threshold
from ._linear.layout import ParameterLayout
from ._linear.threads import passes_own_threads

# The smallest S at which the paper's threshold min(1 - 1/log10 S, 0.7)
# reaches 0.7 is 10^(1/0.3) = 2154 (Vehtari et al. 2024, Sec. 3); rounded up.
DEFAULT_CHECK_DRAWS = 2200
MIN_CHECK_DRAWS = 100
SAMPLER_CHAINS = 16
SAMPLER_WARMUP = 40
# Kept draws a chain: at least 200, so that each half-chain of split R-hat
# has 100; at most 800, stopping once the smallest tail ESS reaches 3,000.
# A 5% quantile's Monte Carlo sd is about 2.1 sd / sqrt(tail ESS) (the
# asymptotic sd of a sample quantile of a normal), 0.038 sd at 3,000: what
# kept the 90% bounds of the benchmark within 0.1 sd of a long run
# (benchmarks/README.md).
SAMPLER_MIN_DRAWS = 200
SAMPLER_MAX_DRAWS = 800
SAMPLER_TAIL_ESS = 3000.0

#: The arguments of ``check_approximation``, checked the package's way.
CHECK_ARGUMENTS = ParameterTable(
    {
        "n_draws": PositiveInt(MIN_CHECK_DRAWS, why="for the tail fit"),
        "random_state": RandomState(),
        "refine": Options(True, False, "always"),
    }
)


class ApproximationCheckMixin:
    """Adds ``check_approximation`` to an estimator with a fitted ``_posterior``."""

    def check_approximation(
        self,
        X,
        y,
        sample_weight=None,
        n_draws=DEFAULT_CHECK_DRAWS,
        random_state=None,
        refine=False,
    ):
        """Compare the Laplace posterior with the exact one on the fitted data.

        Parameters
        ----------
        X : array-like of shape (n_samples, n_features)
        y : array-like of shape (n_samples,)
        sample_weight : array-like of shape (n_samples,), optional
            Pass the data (and weights) the model was fitted on: the exact
            posterior is that of the fit.
        n_draws : int, default=2200
            Draws from the Laplace Gaussian (at least 100). The default is
            the smallest round number at which the published threshold
            reaches its cap of 0.7.
        random_state : int, RandomState, Generator or None
            Seeds every draw (importance draws and sampler alike); the same
            seed gives the same result.
        refine : bool or "always", default=False
            True: when the check is not reliable, run Hamiltonian Monte
            Carlo preconditioned by the Laplace posterior (16 chains, 40
            warm-up iterations each, then 200 to 800 kept ones, stopping
            once every parameter's tail effective sample size reaches
            3,000) and report its draws.
            "always": run the sampler whatever the check says.

        Returns
        -------
        ApproximationCheck
            ``pareto_k``, ``ess``, ``threshold``, ``reliable``,
            ``mean_shift``, ``verdict``, and ``coef_table``,
            ``predict_proba``, ``predict_interval`` from the corrected
            draws; after the sampler also ``rhat``, ``ess_bulk``,
            ``ess_tail``.
        """
        check_is_fitted(self, "coef_")
        args = CHECK_ARGUMENTS.check_values(
            {"n_draws": n_draws, "random_state": random_state, "refine": refine}
        )
        with passes_own_threads():
            # As in a fit: BLAS held at one thread, the row passes on workers.
            target = self._exact_posterior(X, y, sample_weight)
            return self._check(target, args["n_draws"], args["random_state"], args["refine"])

    def _check(self, target, n_draws, random_state, refine):
        rng = as_generator(random_state)
        Z = rng.standard_normal((n_draws, target.dim))
        log_ratio = target.log_density(Z) + 0.5 * np.sum(Z * Z, axis=1)
        weights, k = pareto_smooth(log_ratio)
        threshold = sample_size_threshold(n_draws)
        if refine == "always" or (refine and not k < threshold):
            chains, info = run_chains(
                target,
                rng,
                SAMPLER_CHAINS,
                SAMPLER_WARMUP,
                SAMPLER_MIN_DRAWS,
                SAMPLER_MAX_DRAWS,
                SAMPLER_TAIL_ESS,
            )
            info["chains"] = SAMPLER_CHAINS
            draws = chains.reshape(-1, chains.shape[2])
            flat = np.full(len(draws), 1.0 / len(draws))
            return ApproximationCheck(self, draws, flat, k, threshold, chains, info)
        return ApproximationCheck(self, target.to_theta(Z), weights, k, threshold)

    def _exact_posterior(self, X, y, sample_weight):
        """The fitted model's exact log posterior on (X, y, w), in whitened coordinates."""
        X = self._validate_predict_data(X)
        codes = codes_in_classes(self.classes_, y, X.shape[0])
        w = row_weights(sample_weight, X)
        layout = ParameterLayout.of_estimator(self)
        y_fit = codes.astype(np.float64) if layout.q == 1 else codes
        likelihood = self._make_likelihood(len(self.classes_))
        draw_likelihood = DrawLikelihood(X, layout, likelihood, y_fit, w)
        prior = layout.prior_precision(self.prior_scale_, self._intercept_scale)
        return WhitenedPosterior(draw_likelihood, prior, self._posterior.mean, self._posterior.R)
