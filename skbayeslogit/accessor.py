"""The ``df.bayeslogit`` DataFrame accessor.

Importing this module registers the accessor (``import skbayeslogit`` does
it for you). Every method reads the frame, never changes it, and returns a
new DataFrame, a fitted estimator or a :class:`matplotlib.figure.Figure`::

    import skbayeslogit.accessor  # registers df.bayeslogit
    from skbayeslogit.datasets import make_orchard_lots

    df = make_orchard_lots(400, random_state=0)
    model = df.bayeslogit.fit("storage_grade")        # every numeric column
    model.coef_table()                                # both scales
    table = df.bayeslogit.predict_table(model)        # probability, bounds, label
    scores = df.bayeslogit.compare("storage_grade", random_state=0)

How a fitted model remembers its columns
----------------------------------------
``fit`` passes the features to the estimator as a DataFrame, so the fitted
estimator carries scikit-learn's ``feature_names_in_``. Every method that
takes a fitted model selects exactly those columns from the frame it is
called on (a missing one is a KeyError that lists the frame's columns), so a
model fitted on one frame predicts on another with the same columns, in any
column order. The target is always passed by name, with one exception:
``plot_boundary`` (whose signature has no target) falls back to the
attribute ``target_name_`` that ``fit`` sets on the estimator it returns.

Methods whose ``model`` argument is a name ("laplace", "probit",
"tempered") or an unfitted estimator fit it first on this frame (the
target and every numeric column but the target, standardised as in
``fit``); the evaluation is then in-sample.

Models by name
--------------
"laplace" (:class:`~skbayeslogit.LaplaceLogisticClassifier`), "probit"
(:class:`~skbayeslogit.probit.ProbitClassifier`, binary only) and
"tempered" (:class:`~skbayeslogit.tempered.TemperedLogisticClassifier`)
are imported only when first used, so the accessor works in an
installation where some of them are missing; :func:`make_model` names the
missing one in its error.

Missing values
--------------
By default a NaN in a used column (features or target) is an error that
counts the missing values per column. With ``dropna=True`` the rows with a
NaN in a used column are left out, a :class:`DroppedRowsWarning` says how
many, and DataFrame results record the number in
``result.attrs["rows_dropped"]``. Infinite feature values are always an
error.

Caution
-------
Everything here is a statistical screening aid. Probabilities, intervals,
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
from ._frame.figures import boundary_view, calibration_view, coefficient_view
from ._frame.fitting import fit_on_frame
from ._frame.predictions import default_doubt_model, doubtful_rows, prediction_table
from ._frame.registry import MODEL_NAMES, available_models, make_model

__all__ = [
    "MODEL_NAMES",
    "BayesLogitAccessor",
    "DroppedRowsWarning",
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
        self, target, features=None, model="laplace", *, standardize=True, dropna=False, **params
    ):
        """Fit a classifier to ``target`` from feature columns of this frame.

        Parameters
        ----------
        target : column name
            The labels (any dtype with at least two distinct values).
        features : list of column names, optional
            None: every numeric (and boolean) column except the target, in
            frame order. Non-numeric columns are an error that names them.
        model : {"laplace", "probit", "tempered"} or estimator, default="laplace"
            A name, or a scikit-learn classifier instance, which is cloned
            (the caller's instance is never fitted in place).
        standardize : bool, default=True
            Fit on standardised features (each column centred on its mean
            and divided by its sd) through
            :class:`~skbayeslogit.standardized.StandardizedClassifier`,
            which takes features in their recorded units for prediction and
            reports coefficients on both scales (``coef_table()``). The
            prior then acts on the STANDARDISED scale: ``prior_scale`` is
            the prior sd of the change in the linear predictor per standard
            deviation of a feature, the same statement for every column
            whatever its units. This is the default because a single prior
            scale over features in grams, newtons and percent shrinks them
            very unequally. False: the estimator is fitted on the features
            as recorded and returned bare.
        dropna : bool, default=False
            Leave out rows with a missing feature or target (with a
            DroppedRowsWarning) instead of raising.
        **params
            Constructor parameters of the model (for example
            ``prior_scale=1.0``).

        Returns
        -------
        estimator
            Fitted, with ``feature_names_in_`` the feature columns and
            ``target_name_`` the target column.
        """
        return fit_on_frame(
            self._df, target, features, model, standardize, dropna, params, stacklevel=3
        )

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
            A copy of the frame's (used) rows with new columns, for binary
            models ``prob_<c>``, ``prob_<c>_lower``, ``prob_<c>_upper`` for
            the positive class ``c = classes_[1]``; for multiclass models
            the same three for every class; then ``predicted_label``. The
            bounds are present only for models with ``predict_interval``
            (laplace, probit); other models get the probabilities and label
            only. ``attrs["level"]`` records the level.
        """
        return prediction_table(self._df, model, check_level(level), dropna)

    # -- evaluation ---------------------------------------------------------------
    def confusion(self, target, model, threshold=0.5, *, dropna=False):
        """Counts and rates of the model's calls against the recorded labels.

        Parameters
        ----------
        target : column name
        model : fitted estimator, name or unfitted estimator (fitted here)
        threshold : float in [0, 1], default=0.5
            A row is called class ``c`` when P(c | x) >= threshold.
        dropna : bool, default=False

        Returns
        -------
        pandas.DataFrame
            Binary: one row, for the positive class ``classes_[1]``.
            Multiclass: one row per class, each class against the rest
            (one-vs-rest: a row can be called several classes or none).
            Columns ``threshold``, ``n``, ``tp``, ``fp``, ``fn``, ``tn``,
            ``sensitivity`` (tp / (tp + fn)), ``specificity`` (tn / (tn +
            fp)), ``precision`` (tp / (tp + fp)), ``accuracy`` ((tp + tn) /
            n); a rate with an empty denominator is NaN. Multiclass
            ``attrs["accuracy"]`` is the accuracy of the most probable class.
        """
        threshold = check_probability("threshold", threshold)
        return confusion_table(self._df, target, model, threshold, dropna)

    def calibration(self, target, model, bins=10, *, dropna=False):
        """Reliability table, expected calibration error, Brier score, log loss.

        Parameters
        ----------
        target : column name
        model : fitted estimator, name or unfitted estimator (fitted here)
        bins : int >= 1, default=10
            Equal-width probability bins ``[0, 1/bins], (1/bins, 2/bins],
            ...`` (as scikit-learn's ``calibration_curve``, "uniform").
        dropna : bool, default=False

        Returns
        -------
        pandas.DataFrame
            One row per bin (multiclass: per class and bin, with a ``class``
            column; each class against the rest), columns ``bin``,
            ``bin_lower``, ``bin_upper``, ``count``, ``mean_predicted`` and
            ``observed_frequency`` (NaN for empty bins). Binary: of the
            positive class ``classes_[1]``. The summary is in ``attrs``:

            - ``ece``: expected calibration error, sum over bins of
              count / n * |observed - mean predicted| (multiclass: the mean
              over classes of the one-vs-rest ECE), in [0, 1];
            - ``brier``: mean squared error of the probabilities (binary:
              of the positive class, in [0, 1]; multiclass: summed over
              classes, in [0, 2], as scikit-learn's ``brier_score_loss``);
            - ``log_loss``: mean -log P(recorded label), probabilities
              clipped at machine epsilon;
            - ``ece_by_class`` (multiclass), ``n``, ``bins``, ``classes``.
        """
        bins = check_positive_int("bins", bins)
        return calibration_table(self._df, target, model, bins, dropna)

    def doubtful_labels(self, target, model=None, top=20, *, features=None, dropna=False):
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
            Features when the model is fitted here (default: every numeric
            column but the target).
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
        return doubtful_rows(self._df, target, model, top, features, dropna)

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
    ):
        """Cross-validated comparison of several models on the same folds.

        Parameters
        ----------
        target : column name
        features : list of column names, optional
            Default: every numeric column but the target.
        models : sequence of names/estimators, or mapping label -> model
            Names are built as in ``fit``; estimator instances are cloned
            for every fold. A named model that is not available in this
            installation, or the binary-only "probit" on a multiclass
            target, is skipped with a warning.
        cv : int >= 2, default=5
            Folds of a ``StratifiedKFold(cv, shuffle=True,
            random_state=random_state)``. The folds are drawn once and
            every model sees the same ones.
        random_state : int, RandomState or None, default=None
            Seeds the fold assignment (pass an int for repeatable folds).
        standardize : bool, default=True
            As in ``fit``: every model is fitted on standardised features.
        dropna : bool, default=False

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
        return compare_models(
            self._df,
            target,
            features,
            models,
            cv,
            available=available_models(),
            random_state=random_state,
            standardize=standardize,
            dropna=dropna,
        )

    def cost_threshold(self, target, model, cost_fp, cost_fn, *, dropna=False):
        """The probability threshold that minimises the expected cost of errors.

        A row is called the positive class ``classes_[1]`` when its
        probability is >= the threshold. Correct calls cost nothing.

        Parameters
        ----------
        target : column name
            Binary target.
        model : fitted estimator, name or unfitted estimator (fitted here)
        cost_fp : float > 0
            Cost of calling a ``classes_[0]`` row positive.
        cost_fn : float > 0
            Cost of calling a ``classes_[1]`` row negative.
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
        return cost_threshold_table(self._df, target, model, c_fp, c_fn, dropna)

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
            Filled markers: the interval excludes zero. For a model fitted
            with ``standardize=True`` the coefficients are per standard
            deviation of each feature, so their sizes are comparable.
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
            Two of the model's features, on the horizontal and vertical axes.
            The model's other features are held at their means over the rows.
        n_draws : int >= 0, default=20
            Posterior draws whose boundaries are drawn (models with
            ``sample_coef`` only).
        target : column name, optional
            Labels to show; default ``model.target_name_`` (set by ``fit``).
        level : float in (0, 1), default=0.9
            The shaded band is where the ``level`` credible interval of the
            probability contains 0.5 (models with ``predict_interval``).
        random_state : int, RandomState or None, default=0
            Seeds the posterior draws.
        grid_size : int, default=200
            Grid points per axis for the probability surface.
        dropna : bool, default=False

        Returns
        -------
        matplotlib.figure.Figure
        """
        from .plotting import boundary_figure, require_matplotlib

        require_matplotlib()
        level = check_level(level)
        n_draws = check_positive_int("n_draws", n_draws, minimum=0)
        grid_size = check_positive_int("grid_size", grid_size, minimum=10)
        if target is None:
            target = getattr(model, "target_name_", None)
            if target is None:
                raise ValueError(
                    "pass target=: the model does not record its target column "
                    "(models from df.bayeslogit.fit do)."
                )
        view = boundary_view(
            self._df,
            model,
            x,
            y,
            target,
            n_draws=n_draws,
            level=level,
            random_state=random_state,
            grid_size=grid_size,
            dropna=dropna,
        )
        return boundary_figure(**view)

    def plot_calibration(self, target, model, bins=10, *, dropna=False):
        """Reliability diagram with bin counts and the calibration scores.

        Parameters
        ----------
        target : column name
        model : fitted estimator, name or unfitted estimator (fitted here)
        bins : int, default=10
        dropna : bool, default=False

        Returns
        -------
        matplotlib.figure.Figure
            Binary: the positive class; multiclass: one curve per class
            (each against the rest).
        """
        from .plotting import calibration_figure, require_matplotlib

        require_matplotlib()
        table = self.calibration(target, model, bins, dropna=dropna)
        return calibration_figure(**calibration_view(table, target))
