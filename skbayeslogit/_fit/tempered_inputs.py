"""The data of a tempered fit, in memory or out of core, behind one interface.

The one place where the tempered fit asks which kind of data it has (see
:func:`tempered_fit_data`); everything else asks the object it returns.
Until every design answers the same questions, the two classes here give
the fit its column moments, its largest feature, its Newton start problem,
its penalised objective and the thread setting of its solve.
"""

import contextlib

import numpy as np

from .._linear.design import LinearDesign
from .._linear.scaling import weighted_column_moments
from .._linear.sources import fit_design, is_out_of_core
from .._linear.threads import passes_own_threads
from .newton import NewtonProblem

# Rows of the sample on which the convex start is fitted when the data are
# larger: the start only has to land in the right basin.
_START_ROWS = 20_000


def tempered_fit_data(estimator, X, y, sample_weight):
    """Check fit input and wrap it: :class:`InMemoryData` or :class:`SourceData`.

    Memory-mapped or dask input goes through a source (each objective
    evaluation one blocked pass of the same kernels, see ``_linear.sources``);
    anything else is validated into memory by the estimator's
    ``_validate_fit_data``.  Sets the estimator's ``classes_``.
    """
    if is_out_of_core(X, y, sample_weight):
        return SourceData(fit_design(estimator, X, y, sample_weight, estimator.fit_intercept))
    X, codes, w = estimator._validate_fit_data(X, y, sample_weight)
    q = 1 if len(estimator.classes_) == 2 else len(estimator.classes_)
    return InMemoryData(LinearDesign(X, q, estimator.fit_intercept), codes, w)


def _penalised(value, grad, theta, prior):
    return value + 0.5 * float(theta @ (prior * theta)), grad + prior * theta


class InMemoryData:
    """Validated in-memory data: a LinearDesign, class codes and weights."""

    def __init__(self, design, codes, w):
        self.design, self.codes, self.w = design, codes, w
        self.total_weight = float(w.sum())

    def column_moments(self, centred):
        """Weighted column centres and spreads (see ``weighted_column_moments``)."""
        return weighted_column_moments(self.design.X, self.w, centred)

    def largest_feature(self):
        """max |x| over X; max(|max|, |min|): no temporary the size of X."""
        X = self.design.X
        return max(abs(float(X.max())), abs(float(X.min())))

    def start_problem(self, likelihood, prior, free_map):
        """The Newton problem of a convex start, on a row sample when the data are large."""
        y = self.codes.astype(np.float64) if self.design.q == 1 else self.codes
        problem = NewtonProblem(self.design, likelihood, y, self.w, prior, free_map)
        if self.design.n > _START_ROWS:
            # The logistic fit on a row sample (weights rescaled to the full
            # total) lands in the same basin as the full-data solve.
            problem = problem.subsample(_START_ROWS) or problem
        return problem

    def objective(self, likelihood, prior):
        """theta -> (loss sum + penalty, gradient), one threaded gradient pass each."""
        labels = likelihood.labels(self.codes)

        def evaluate(theta):
            value, grad, _ = self.design.loss_grad(likelihood, labels, self.w, theta)
            # Successive evaluations are at nearby parameters: from now on
            # each row's normaliser starts from its previous value.
            likelihood.warm = True
            return _penalised(value, grad, theta, prior)

        return evaluate

    def solving(self):
        """Every pass runs on the pass's worker threads with BLAS at one
        thread; holding that for the whole solve saves resetting BLAS's
        thread count around each pass."""
        return passes_own_threads()


class SourceData:
    """Out-of-core data (memory map or dask) behind a SourceDesign."""

    def __init__(self, design):
        self.design = design
        self.total_weight = float(design.total_weight)

    def column_moments(self, centred):
        """The same weighted moments, merged from the validation pass."""
        return self.design.column_moments(centred=centred)

    def largest_feature(self):
        """max |x|, from the validation pass."""
        return float(np.max(self.design.stats["colmax"]))

    def start_problem(self, likelihood, prior, free_map):
        """The Newton problem of a convex start on all rows."""
        return NewtonProblem(self.design, likelihood, None, None, prior, free_map)

    def objective(self, likelihood, prior):
        """theta -> (loss sum + penalty, gradient), one blocked pass each."""

        def evaluate(theta):
            value, grad = self.design.value_grad(likelihood, theta)
            return _penalised(value, grad, theta, prior)

        return evaluate

    def solving(self):
        """Out-of-core passes use BLAS's own threads."""
        return contextlib.nullcontext()
