"""The ``df.bayeslogit`` DataFrame accessor.

Importing this module registers the accessor (``import skbayeslogit`` does
it for you). Every method reads the frame, never changes it, and returns a
new DataFrame, a fitted model or a :class:`matplotlib.figure.Figure`.

``fit`` returns a :class:`~skbayeslogit._frame.model.FrameModel`: the column
roles (decided once; ``columns_`` and ``statements_`` say which and why),
the encoding (levels named ``column=level``) and the estimator as one
fitted object that reads its columns by name from any frame. Methods whose
``model`` is a name ("laplace", "probit", "tempered", imported when first
used) or an unfitted estimator fit it on this frame first (in-sample).
Missing values: ``missing="error"``, ``"drop"`` (or ``dropna=True``; a
DroppedRowsWarning, ``attrs["rows_dropped"]``) or ``"impute"``.

Caution: everything here is a statistical screening aid. Probabilities, intervals,
doubtful-label lists and cost thresholds are only as good as the data and
the model; where a decision affects people (credit, health, safety,
employment) they do not replace review by someone who knows the domain.
"""

import pandas as pd

from ._checks.inputs import check_level
from ._frame.approximation import approximation_check
from ._frame.arguments import check_cost, check_positive_int, check_probability
from ._frame.columns import DroppedRowsWarning
from ._frame.comparison import compare_models
from ._frame.evaluation import calibration_table, confusion_table, cost_threshold_table
from ._frame.figures import (
    boundary_view,
    calibration_view,
    checked_boundary_options,
    coefficient_view,
)
from ._frame.fitting import evidence_of_columns, fit_on_frame
from ._frame.model import FrameModel
from ._frame.predictions import default_doubt_model, doubtful_rows, prediction_table
from ._frame.registry import MODEL_NAMES, available_models, is_fitted, make_model

__all__ = [
    "MODEL_NAMES",
    "BayesLogitAccessor",
    "DroppedRowsWarning",
    "FrameModel",
    "make_model",
]


@pd.api.extensions.register_dataframe_accessor("bayeslogit")
class BayesLogitAccessor:
    """Bayesian and robust linear classification on a DataFrame: ``df.bayeslogit``.

    See the module docstring for how fitted models remember their columns,
    models by name, and missing values. Results are a statistical screening
    aid, not a substitute for domain review where decisions affect people.
    """

    def __init__(self, df):
        # pandas rebuilds the accessor on every attribute access: keep this
        # free of work and side effects.
        self._df = df

    # -- fitting -----------------------------------------------------------------
    def fit(
        self,
        target,
        features=None,
        model="laplace",
        *,
        positive=None,
        weight=None,
        id=None,
        exclude=None,
        missing="error",
        max_levels=20,
        standardize=True,
        dropna=False,
        **params,
    ):
        """Fit a classifier to ``target`` from the feature columns of this frame.

        Parameters
        ----------
        target : column name
            The labels (any dtype, at least two distinct values).
        features : list of column names, optional
            None: every column the role rules make a feature.
        model : {"laplace", "probit", "tempered"} or estimator, default="laplace"
            A name, or a classifier instance (cloned, never fitted in place).
        positive : label, optional
            Positive class of a binary target (probabilities, intervals,
            confusion and costs are about it). Default: the second class in
            sorted order (scikit-learn's ``classes_[1]``).
        weight : column name, optional
            Frequency weights (finite, >= 0): weight 3 counts as three rows.
        id, exclude : column name or list, optional
            ID columns (never features, kept in row-level outputs); columns
            left out.
        missing : {"error", "drop", "impute"}, default="error"
            See "Missing values" above; ``dropna=True`` is ``"drop"``.
        max_levels : int, default=20
            Text columns with more distinct values are left out.
        standardize : bool, default=True
            Fit through :class:`~skbayeslogit.standardized.StandardizedClassifier`:
            ``prior_scale`` acts per standard deviation of each encoded
            column; ``coef_table()`` reports both scales.
        dropna : bool, default=False
        **params
            Constructor parameters of the model (``prior_scale=1.0``, ...).

        Returns
        -------
        FrameModel
        """
        options = {
            "features": features, "positive": positive, "weight": weight, "id": id,
            "exclude": exclude, "missing": missing, "max_levels": max_levels,
            "standardize": standardize, "dropna": dropna,
        }  # fmt: skip
        return fit_on_frame(self._df, target, model, options, params)

    def column_evidence(self, target, model="laplace", *, refit=False, **fit_options):
        """Bayes factor of "no effect" for each original column.

        Parameters
        ----------
        target : column name
        model : name, unfitted estimator or fitted FrameModel, default="laplace"
            Fitted here unless fitted, with ``fit_options`` (keywords of
            ``fit``); it needs a proper prior (not ``prior_scale=None``).
        refit : bool, default=False
            False: the Savage-Dickey ratio of the fitted Gaussian posterior
            (Dickey 1971). True: Laplace evidences with and without each
            column, one refit per column on this frame (accurate in the
            tails too).

        Returns
        -------
        pandas.DataFrame
            One row per original column (a categorical column's levels
            together): ``n_parameters``, ``log10_bf_no_effect`` (positive
            favours no effect), ``evidence`` (verbal) and ``method``.
        """
        if not is_fitted(model):
            model = self.fit(target, model=model, **fit_options)
        return evidence_of_columns(model, self._df if refit else None)

    # -- prediction ----------------------------------------------------------------
    def predict_table(self, model, level=0.9, *, dropna=False):
        """The frame plus predicted probabilities, credible bounds and label.

        Parameters
        ----------
        model : fitted estimator
            Its ``feature_names_in_`` columns are read from this frame.
        level : float in (0, 1), default=0.9
            Credible level of the bounds.
        dropna : bool, default=False
            Leave out rows with a missing feature instead of raising.

        Returns
        -------
        pandas.DataFrame
            A copy of the frame's (used) rows (IDs included) with new
            columns: binary ``prob_<c>``, ``prob_<c>_lower``,
            ``prob_<c>_upper`` of the positive class ``c``, multiclass the
            three for every class (bounds only for models with
            ``predict_interval``); then ``predicted_label``.
            ``attrs["level"]`` and ``attrs["unseen_levels"]``.
        """
        return prediction_table(self._df, model, check_level(level), dropna)

    # -- evaluation ---------------------------------------------------------------
    def confusion(self, target, model, threshold=0.5, *, positive=None, dropna=False):
        """Counts and rates of the model's calls against the recorded labels.

        Parameters
        ----------
        target : column name
        model : fitted estimator, name or unfitted estimator (fitted here)
        threshold : float in [0, 1], default=0.5
            A row is called class ``c`` when P(c | x) >= threshold.
        positive : label, optional
            Positive class of a binary target. Default: the model's own
            (``fit(positive=...)``), else scikit-learn's ``classes_[1]``.
        dropna : bool, default=False

        Returns
        -------
        pandas.DataFrame
            Binary: one row, for the positive class.
            Multiclass: one row per class, each class against the rest
            (one-vs-rest: a row can be called several classes or none).
            Columns ``threshold``, ``n``, ``tp``, ``fp``, ``fn``, ``tn``,
            ``sensitivity`` (tp / (tp + fn)), ``specificity`` (tn / (tn +
            fp)), ``precision`` (tp / (tp + fp)), ``accuracy`` ((tp + tn) /
            n); a rate with an empty denominator is NaN. Multiclass
            ``attrs["accuracy"]`` is the accuracy of the most probable class.
        """
        threshold = check_probability("threshold", threshold)
        return confusion_table(self._df, target, model, threshold, dropna, positive)

    def calibration(self, target, model, bins=10, *, positive=None, dropna=False):
        """Reliability table, expected calibration error, Brier score, log loss.

        Parameters
        ----------
        target : column name
        model : fitted estimator, name or unfitted estimator (fitted here)
        bins : int >= 1, default=10
            Equal-width probability bins ``[0, 1/bins], (1/bins, 2/bins],
            ...`` (as scikit-learn's ``calibration_curve``, "uniform").
        positive : label, optional
            As in ``confusion``.
        dropna : bool, default=False

        Returns
        -------
        pandas.DataFrame
            One row per bin (multiclass: per class and bin, with a ``class``
            column; each class against the rest), columns ``bin``,
            ``bin_lower``, ``bin_upper``, ``count``, ``mean_predicted`` and
            ``observed_frequency`` (NaN for empty bins). Binary: of the
            positive class. The summary is in ``attrs``:

            - ``ece``: sum over bins of count / n * |observed - mean
              predicted| (multiclass: the mean one-vs-rest ECE);
            - ``brier``: mean squared error of the probabilities (binary: of
              the positive class; multiclass: summed over classes, in [0, 2]);
            - ``log_loss``: mean -log P(recorded label), clipped at epsilon;
            - ``ece_by_class`` (multiclass), ``n``, ``bins``, ``classes``.
        """
        bins = check_positive_int("bins", bins)
        return calibration_table(self._df, target, model, bins, dropna, positive)

    def doubtful_labels(
        self, target, model=None, top=20, *, features=None, positive=None, dropna=False
    ):
        """The rows whose recorded labels the model most disagrees with.

        Parameters
        ----------
        target : column name
        model : None, name, unfitted or fitted estimator, default=None
            None: the robust "tempered" model fitted on this frame; when it
            is not available in this installation, "laplace" with a
            warning (a non-robust model is pulled towards the wrong labels,
            so it finds fewer of them). A fitted model is used as is.
        top : int or None, default=20
            How many rows to return; None returns every row, ranked.
        features : list of column names, optional
            Features when the model is fitted here (default: by the roles).
        positive : label, optional
            As in ``confusion``.
        dropna : bool, default=False

        Returns
        -------
        pandas.DataFrame
            The selected rows of the frame, most doubtful first (ties in
            frame order), plus ``doubt_score``, ``prob_recorded_label`` (the
            model's probability of the recorded label) and
            ``most_likely_label``. The score is the model's
            ``label_doubt(X, y)`` when it has one (the tempered model);
            otherwise -log P(recorded label), in nats (>= 0, larger = more
            doubt). ``attrs["scorer"]`` says which and which model.

        Notes
        -----
        A list of doubtful rows is a prompt for a second look by someone
        who can check the records, not a verdict that the labels are wrong.
        """
        if top is not None:
            top = check_positive_int("top", top)
        if model is None:
            # Looked up here, at call time: the installation decides.
            model = default_doubt_model(available_models())
        return doubtful_rows(self._df, target, model, top, features, dropna, positive)

    def compare(
        self,
        target,
        features=None,
        models=("laplace", "probit", "tempered"),
        cv=5,
        *,
        random_state=None,
        standardize=True,
        dropna=False,
        **fit_options,
    ):
        """Cross-validated comparison of several models on the same folds.

        Parameters
        ----------
        target : column name
        features : list of column names, optional
            Default: every column the role rules make a feature.
        models : sequence of names/estimators, or mapping label -> model
            Names are built as in ``fit``; estimator instances are cloned
            for every fold. A named model that is not available in this
            installation, or the binary-only "probit" on a multiclass
            target, is skipped with a warning.
        cv : int >= 2, default=5
            Folds of a ``StratifiedKFold(cv, shuffle=True, random_state=...)``,
            drawn once: every model sees the same ones.
        random_state : int, RandomState or None, default=None
            Seeds the fold assignment.
        standardize : bool, default=True
            As in ``fit``.
        dropna : bool, default=False
        **fit_options
            ``positive``, ``weight``, ``id``, ``exclude``, ``missing``,
            ``max_levels`` as in ``fit``. The column roles are decided once
            on the whole frame; each fold encodes its own training rows (a
            level absent from them scores as no level).

        Returns
        -------
        pandas.DataFrame
            One row per model (index ``model``), the mean over folds of
            ``accuracy``, ``log_loss``, ``brier``, ``ece`` (10 bins, as in
            ``calibration``), their standard deviations across folds
            (``*_sd``, ddof=1), and ``fit_time`` (mean seconds per fit,
            after one untimed warm-up fit so that one-off compilation is
            not counted). Scores are on the held-out fold of each split.
        """
        cv = check_positive_int("cv", cv, minimum=2)
        options = {"features": features, "dropna": dropna, **fit_options}
        return compare_models(
            self._df,
            target,
            models,
            cv,
            available=available_models(),
            random_state=random_state,
            standardize=standardize,
            options=options,
        )

    def cost_threshold(self, target, model, cost_fp, cost_fn, *, positive=None, dropna=False):
        """The probability threshold that minimises the expected cost of errors.

        A row is called the positive class when its probability is >= the
        threshold. Correct calls cost nothing.

        Parameters
        ----------
        target : column name
            Binary target.
        model : fitted estimator, name or unfitted estimator (fitted here)
        cost_fp : float > 0
            Cost of calling a negative row positive.
        cost_fn : float > 0
            Cost of calling a positive row negative.
        positive : label, optional
            As in ``confusion``.
        dropna : bool, default=False

        Returns
        -------
        pandas.DataFrame
            Two rows (index ``rule``):

            - ``decision_theoretic``: threshold cost_fp / (cost_fp +
              cost_fn), the Bayes decision when the probabilities are
              calibrated (call positive when p cost_fn >= (1 - p) cost_fp);
            - ``empirical``: the threshold that minimises the total cost on
              these rows, placed midway between the two neighbouring
              predicted probabilities (among equally cheap choices, the one
              nearest the decision-theoretic threshold).

            Columns ``threshold``, ``tp``, ``fp``, ``fn``, ``tn``,
            ``sensitivity``, ``specificity``, ``cost`` (total on these rows)
            and ``cost_per_row``.

        Notes
        -----
        The decision-theoretic threshold is only as good as the calibration
        of the probabilities (see ``calibration``). The empirical one is
        fitted to these very rows and is optimistic on them; check it on
        held-out data. Costs are rarely known exactly: look at how the
        result moves when they change, and keep a person who knows the
        domain in the loop where the decision affects people.
        """
        c_fp = check_cost("cost_fp", cost_fp)
        c_fn = check_cost("cost_fn", cost_fn)
        return cost_threshold_table(self._df, target, model, c_fp, c_fn, dropna, positive)

    def check_approximation(self, target, model="laplace", *, dropna=False, **options):
        """How far the model's Laplace posterior is from the exact one on this frame's rows.

        Parameters
        ----------
        target : column name
        model : fitted estimator, name or unfitted estimator (fitted here), default="laplace"
            With a Laplace posterior ("laplace", "probit"); a standardised one
            (``fit``'s default) is checked on its standardised features.
        dropna : bool, default=False
        **options : ``n_draws``, ``random_state``, ``refine``, as in the estimator's method.

        Returns
        -------
        ApproximationCheck
            A standardised model's corrected ``coef_table`` is on that scale.
        """
        return approximation_check(self._df, target, model, dropna, options)

    # -- plots ----------------------------------------------------------------------
    def plot_coefficients(self, model, level=0.9, *, include_intercept=False):
        """Point estimates with credible intervals, one row per feature.

        Parameters
        ----------
        model : fitted estimator with ``coef_table`` (laplace, probit)
        level : float in (0, 1), default=0.9
        include_intercept : bool, default=False
            The intercept is on another footing (the log-odds at the
            feature means, or at zero), so it is left out by default.

        Returns
        -------
        matplotlib.figure.Figure
            Filled markers: the interval excludes zero. Standardised
            coefficients (``standardize=True``) have comparable sizes.
        """
        from .plotting import coefficient_figure, require_matplotlib

        require_matplotlib()
        return coefficient_figure(**coefficient_view(model, level, include_intercept))

    def plot_boundary(
        self,
        model,
        x,
        y,
        n_draws=20,
        *,
        target=None,
        level=0.9,
        random_state=0,
        grid_size=200,
        dropna=False,
    ):
        """Data, decision boundary and its posterior uncertainty in two features.

        Parameters
        ----------
        model : fitted binary estimator (or a name, fitted here on ``target``)
        x, y : column names
            Two numeric features of the model, on the two axes; the others
            are held at their means (categorical: the most frequent level).
        n_draws : int >= 0, default=20
            Posterior draws whose boundaries are drawn (with ``sample_coef``).
        target : column name, optional
            Labels to show; default ``model.target_name_`` (set by ``fit``).
        level : float in (0, 1), default=0.9
            The shaded band is where the ``level`` credible interval of the
            probability contains 0.5 (models with ``predict_interval``).
        random_state : int, RandomState or None, default=0
        grid_size : int, default=200
            Grid points per axis for the probability surface.
        dropna : bool, default=False

        Returns
        -------
        matplotlib.figure.Figure
        """
        from .plotting import boundary_figure, require_matplotlib

        require_matplotlib()
        options = {"n_draws": n_draws, "level": level, "random_state": random_state,
                   "grid_size": grid_size, "dropna": dropna}  # fmt: skip
        view = boundary_view(self._df, model, x, y, target, **checked_boundary_options(options))
        return boundary_figure(**view)

    def plot_calibration(self, target, model, bins=10, *, positive=None, dropna=False):
        """Reliability diagram with bin counts and the calibration scores.

        Parameters
        ----------
        target : column name
        model : fitted estimator, name or unfitted estimator (fitted here)
        bins : int, default=10
        positive : label, optional
            As in ``confusion``.
        dropna : bool, default=False

        Returns
        -------
        matplotlib.figure.Figure
            Binary: the positive class; multiclass: one curve per class
            (each against the rest).
        """
        from .plotting import calibration_figure, require_matplotlib

        require_matplotlib()
        table = self.calibration(target, model, bins, positive=positive, dropna=dropna)
        return calibration_figure(**calibration_view(table, target))
