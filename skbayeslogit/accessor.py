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

import copy
import importlib
import numbers
import time
import warnings
from collections.abc import Mapping

import numpy as np
import pandas as pd
from sklearn.base import clone
from sklearn.exceptions import NotFittedError
from sklearn.model_selection import StratifiedKFold
from sklearn.utils.validation import check_is_fitted

__all__ = [
    "MODEL_NAMES",
    "BayesLogitAccessor",
    "DroppedRowsWarning",
    "make_model",
]

#: Model names accepted wherever a ``model`` argument is, and where each
#: class lives (imported lazily).
MODEL_NAMES = {
    "laplace": ("skbayeslogit.laplace", "LaplaceLogisticClassifier"),
    "probit": ("skbayeslogit.probit", "ProbitClassifier"),
    "tempered": ("skbayeslogit.tempered", "TemperedLogisticClassifier"),
}

_BINARY_ONLY = {"probit"}


class DroppedRowsWarning(UserWarning):
    """Rows with missing values were left out (``dropna=True``)."""


# -- models ----------------------------------------------------------------------


def make_model(name, **params):
    """A new, unfitted estimator of this package by name.

    Parameters
    ----------
    name : {"laplace", "probit", "tempered"}
    **params
        Constructor keyword arguments.

    Returns
    -------
    estimator
        Unfitted.

    Raises
    ------
    ValueError
        For an unknown name.
    ImportError
        When the model's module is not part of this installation.
    """
    if not isinstance(name, str) or name not in MODEL_NAMES:
        raise ValueError(f"unknown model {name!r}; choose one of {', '.join(MODEL_NAMES)}.")
    module_name, class_name = MODEL_NAMES[name]
    try:
        module = importlib.import_module(module_name)
    except ModuleNotFoundError as exc:
        # Only the model's own module being absent means "not available";
        # a missing dependency inside it is a real error and propagates.
        if exc.name != module_name:
            raise
        raise ImportError(
            f"model {name!r} ({module_name}.{class_name}) is not available in this "
            f"installation of skbayeslogit; available: {', '.join(available_models())}."
        ) from exc
    return getattr(module, class_name)(**params)


def available_models():
    """Names of the models whose modules import in this installation.

    Returns
    -------
    list of str
    """
    names = []
    for name, (module_name, _) in MODEL_NAMES.items():
        try:
            importlib.import_module(module_name)
        except ModuleNotFoundError as exc:
            if exc.name != module_name:
                raise
            continue
        names.append(name)
    return names


def _build(model, params, standardize):
    """Unfitted estimator from a name or an estimator instance (cloned)."""
    if isinstance(model, str):
        est = make_model(model, **params)
    elif isinstance(model, type):
        raise TypeError(
            f"model must be a name or an estimator instance, not the class {model.__name__}; "
            f"use {model.__name__}()."
        )
    elif hasattr(model, "fit") and hasattr(model, "predict_proba"):
        # Never fit the caller's instance in place.
        est = clone(model)
        if params:
            est.set_params(**params)
    else:
        raise TypeError(
            "model must be one of "
            f"{', '.join(map(repr, MODEL_NAMES))} or a classifier with fit and "
            f"predict_proba; got {model!r}."
        )
    if standardize:
        from .standardized import StandardizedClassifier

        est = StandardizedClassifier(est)
    return est


def _model_label(model):
    if isinstance(model, str):
        return model
    inner = getattr(model, "estimator", model)
    return type(inner).__name__


def _is_fitted(model):
    try:
        check_is_fitted(model)
    except (NotFittedError, TypeError):
        # TypeError: not an estimator at all; _build then says what is expected.
        return False
    return True


def _check_positive_int(name, value, minimum=1):
    if isinstance(value, bool) or not isinstance(value, numbers.Integral) or value < minimum:
        raise ValueError(f"{name} must be an integer >= {minimum}; got {value!r}.")
    return int(value)


def _check_probability(name, value):
    if isinstance(value, bool) or not isinstance(value, numbers.Real) or not 0 <= value <= 1:
        raise ValueError(f"{name} must be a number in [0, 1]; got {value!r}.")
    return float(value)


# -- scores (shared by calibration and compare) ----------------------------------------


def _reliability(prob, hit, bins):
    """Uniform-bin reliability of one probability column.

    Bins are ``[0, 1/bins], (1/bins, 2/bins], ...`` (the same rule as
    scikit-learn's ``calibration_curve`` with ``strategy="uniform"``).

    Parameters
    ----------
    prob : ndarray of shape (n,), in [0, 1]
    hit : ndarray of shape (n,), bool (the event happened)
    bins : int

    Returns
    -------
    table : dict of ndarray of shape (bins,)
    ece : float
        sum over bins of count / n * |observed - mean predicted|.
    """
    edges = np.linspace(0.0, 1.0, bins + 1)
    ids = np.searchsorted(edges[1:-1], prob)
    count = np.bincount(ids, minlength=bins)
    sum_p = np.bincount(ids, weights=prob, minlength=bins)
    sum_y = np.bincount(ids, weights=hit.astype(float), minlength=bins)
    with np.errstate(divide="ignore", invalid="ignore"):
        mean_p = np.where(count > 0, sum_p / count, np.nan)
        obs = np.where(count > 0, sum_y / count, np.nan)
    full = count > 0
    ece = float(np.sum(count[full] * np.abs(obs[full] - mean_p[full])) / len(prob))
    table = {
        "bin": np.arange(bins),
        "bin_lower": edges[:-1],
        "bin_upper": edges[1:],
        "count": count.astype(np.int64),
        "mean_predicted": mean_p,
        "observed_frequency": obs,
    }
    return table, ece


def _scores(P, codes, bins=10):
    """Log loss, Brier score and ECE of probabilities P for class codes.

    Binary (two columns): Brier and ECE on the probability of the second
    class. Multiclass: Brier summed over classes (range [0, 2]) and the
    class-wise ECE (mean of the one-vs-rest ECEs).
    """
    n, K = P.shape
    rows = np.arange(n)
    eps = np.finfo(np.float64).eps
    log_loss = float(-np.mean(np.log(np.clip(P[rows, codes], eps, 1.0))))
    if K == 2:
        hit = codes == 1
        brier = float(np.mean((hit - P[:, 1]) ** 2))
        _, ece = _reliability(P[:, 1], hit, bins)
        return {"log_loss": log_loss, "brier": brier, "ece": ece}
    onehot = np.zeros_like(P)
    onehot[rows, codes] = 1.0
    brier = float(np.mean(np.sum((onehot - P) ** 2, axis=1)))
    eces = [_reliability(P[:, k], codes == k, bins)[1] for k in range(K)]
    return {"log_loss": log_loss, "brier": brier, "ece": float(np.mean(eces))}


def _rates(tp, fp, fn, tn):
    with np.errstate(divide="ignore", invalid="ignore"):
        tp, fp, fn, tn = (np.asarray(v, dtype=float) for v in (tp, fp, fn, tn))
        return {
            "sensitivity": np.where(tp + fn > 0, tp / (tp + fn), np.nan),
            "specificity": np.where(tn + fp > 0, tn / (tn + fp), np.nan),
            "precision": np.where(tp + fp > 0, tp / (tp + fp), np.nan),
            "accuracy": (tp + tn) / (tp + fp + fn + tn),
        }


# -- the accessor ------------------------------------------------------------------


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

    # -- column handling -----------------------------------------------------------
    def _require_columns(self, names):
        cols = list(self._df.columns)
        missing = [n for n in names if n not in cols]
        if missing:
            raise KeyError(
                f"column(s) not in the DataFrame: {', '.join(map(repr, missing))}; "
                f"available columns: {', '.join(map(str, cols))}."
            )

    def _numeric_columns(self, exclude=()):
        return [
            c for c, dt in self._df.dtypes.items() if c not in exclude and _is_numeric_dtype(dt)
        ]

    def _resolve_features(self, target, features):
        if features is None:
            feats = self._numeric_columns(exclude=(target,))
            if not feats:
                others = [str(c) for c in self._df.columns if c != target]
                raise ValueError(
                    f"no numeric feature columns besides the target {target!r}; the other "
                    f"columns ({', '.join(others) or 'none'}) are not numeric. Encode them "
                    "as numbers first (for example pandas.get_dummies or "
                    "sklearn.preprocessing.OneHotEncoder)."
                )
            return feats
        if isinstance(features, str):
            features = [features]
        feats = list(features)
        if not feats:
            raise ValueError("features is empty; pass column names or None for all numeric.")
        if len(set(feats)) != len(feats):
            dup = sorted({str(f) for f in feats if feats.count(f) > 1})
            raise ValueError(f"features lists a column more than once: {', '.join(dup)}.")
        if target is not None and target in feats:
            raise ValueError(f"the target {target!r} is also listed among the features.")
        return feats

    def _frame(self, target, features, dropna, warn=True):
        """Checked features (new float64 DataFrame) and target of the used rows.

        Parameters
        ----------
        target : column name or None
        features : list of column names (already resolved)
        dropna : bool
        warn : bool
            Emit the DroppedRowsWarning (off when the same rows were already
            reported by a fit moments before).

        Returns
        -------
        X : pandas.DataFrame (n_used, d), float64, string column names
        y : ndarray (n_used,) or None
        keep : ndarray (n_rows,), bool; the rows used
        """
        needed = list(features) + ([] if target is None else [target])
        self._require_columns(needed)
        non_str = [f for f in features if not isinstance(f, str)]
        if non_str:
            raise TypeError(
                "feature column names must be strings (scikit-learn records them as "
                f"feature_names_in_); rename {', '.join(map(repr, non_str))}."
            )
        df = self._df
        bad = [f for f in features if not _is_numeric_dtype(df[f].dtype)]
        if bad:
            kinds = ", ".join(f"{f} ({df[f].dtype})" for f in bad)
            raise ValueError(
                f"non-numeric feature column(s): {kinds}. Encode them as numbers first "
                "(for example pandas.get_dummies or sklearn.preprocessing.OneHotEncoder), "
                "or leave them out of features."
            )
        missing = df[needed].isna()
        per_col = missing.sum()
        row_missing = missing.any(axis=1).to_numpy()
        n_missing = int(row_missing.sum())
        if n_missing and not dropna:
            counts = ", ".join(f"{c}: {int(k)}" for c, k in per_col.items() if k)
            raise ValueError(
                f"{n_missing} of {len(df)} rows have missing values (per column: {counts}). "
                "Drop or impute them first, or pass dropna=True to leave those rows out."
            )
        keep = ~row_missing
        if n_missing and warn:
            counts = ", ".join(f"{c}: {int(k)}" for c, k in per_col.items() if k)
            warnings.warn(
                f"dropped {n_missing} of {len(df)} rows with missing values "
                f"(per column: {counts}).",
                DroppedRowsWarning,
                stacklevel=3,
            )
        used = df.loc[keep, list(features)] if n_missing else df[list(features)]
        # A new float64 array: whatever the caller's dtypes (nullable, bool,
        # read-only buffers), nothing downstream can reach their memory.
        X = np.array(used.to_numpy(dtype=np.float64, na_value=np.nan), dtype=np.float64)
        if not np.all(np.isfinite(X)):
            inf_cols = [f for j, f in enumerate(features) if not np.all(np.isfinite(X[:, j]))]
            raise ValueError(
                f"feature column(s) with infinite values: {', '.join(inf_cols)}; replace "
                "them before fitting."
            )
        X = pd.DataFrame(X, columns=list(features), index=used.index)
        y = None
        if target is not None:
            col = df[target] if not n_missing else df.loc[keep, target]
            y = np.asarray(col.to_numpy(dtype=object) if _is_text(col) else col.to_numpy())
            classes = pd.unique(y)
            if len(classes) == 0:
                raise ValueError(f"no rows to fit: the frame has {len(df)} rows and none is used.")
            if len(classes) < 2:
                raise ValueError(
                    f"the target {target!r} has only one class ({classes[0]!r}) among the "
                    f"{len(y)} rows used; a classifier needs at least two classes."
                )
        return X, y, keep

    def _frame_for(self, model, target, dropna, warn=True):
        """Features the fitted model was trained on, taken from this frame."""
        names = getattr(model, "feature_names_in_", None)
        if names is None:
            raise TypeError(
                "the model does not record its feature names (feature_names_in_); fit it "
                "on a DataFrame, for example with df.bayeslogit.fit, so that its columns "
                "can be found in this frame."
            )
        return self._frame(target, [str(n) for n in names], dropna, warn)

    def _fitted(self, model, target, dropna):
        """A fitted model and the data it sees: use a fitted one, fit anything else."""
        if model is None:
            raise TypeError("model is required.")
        if not isinstance(model, str) and not isinstance(model, type) and _is_fitted(model):
            if not hasattr(model, "predict_proba"):
                raise TypeError(f"model must have predict_proba; got {type(model).__name__}.")
            X, y, keep = self._frame_for(model, target, dropna)
            return model, X, y, keep
        est = self.fit(target, None, model, dropna=dropna)
        X, y, keep = self._frame_for(est, target, dropna, warn=False)
        return est, X, y, keep

    def _subset(self, keep):
        return self._df if keep.all() else self._df.loc[keep]

    @staticmethod
    def _codes(model, y, target):
        classes = np.asarray(model.classes_)
        codes = pd.Index(classes).get_indexer(y)
        if np.any(codes < 0):
            unknown = pd.unique(y[codes < 0])
            raise ValueError(
                f"the target {target!r} has label(s) the model was not fitted on: "
                f"{', '.join(map(repr, unknown[:10]))}; the model's classes are "
                f"{', '.join(map(repr, classes))}."
            )
        return classes, codes

    @staticmethod
    def _record(result, keep, **attrs):
        result.attrs.update(attrs)
        result.attrs["rows_dropped"] = int((~keep).sum())
        return result

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
        feats = self._resolve_features(target, features)
        X, y, _ = self._frame(target, feats, dropna)
        est = _build(model, params, standardize)
        est.fit(X, y)
        est.target_name_ = target
        return est

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
        from ._checks.inputs import check_level

        level = check_level(level)
        if isinstance(model, str) or not _is_fitted(model):
            raise TypeError(
                "predict_table needs a fitted model; fit one first with df.bayeslogit.fit."
            )
        X, _, keep = self._frame_for(model, None, dropna)
        classes = np.asarray(model.classes_)
        P = np.asarray(model.predict_proba(X))
        bounds = (
            model.predict_interval(X, level=level) if hasattr(model, "predict_interval") else None
        )
        shown = [1] if len(classes) == 2 else range(len(classes))
        new = {}
        for k in shown:
            name = f"prob_{classes[k]}"
            new[name] = P[:, k]
            if bounds is not None:
                lo, hi = (np.asarray(b) for b in bounds)
                new[f"{name}_lower"] = lo if lo.ndim == 1 else lo[:, k]
                new[f"{name}_upper"] = hi if hi.ndim == 1 else hi[:, k]
        new["predicted_label"] = classes[np.argmax(P, axis=1)]
        clash = [c for c in new if c in self._df.columns]
        if clash:
            raise ValueError(
                f"the frame already has column(s) {', '.join(clash)}; drop or rename them "
                "before predict_table adds its own."
            )
        out = self._subset(keep).assign(**new)
        # Our own copy of the caller's attrs: updating it must not reach theirs.
        out.attrs = copy.deepcopy(self._df.attrs)
        return self._record(out, keep, level=level)

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
        threshold = _check_probability("threshold", threshold)
        model, X, y, keep = self._fitted(model, target, dropna)
        classes, codes = self._codes(model, y, target)
        P = np.asarray(model.predict_proba(X))
        shown = [1] if len(classes) == 2 else range(len(classes))
        rows = []
        for k in shown:
            truth = codes == k
            called = P[:, k] >= threshold
            rows.append(
                {
                    "threshold": threshold,
                    "n": len(codes),
                    "tp": int(np.sum(truth & called)),
                    "fp": int(np.sum(~truth & called)),
                    "fn": int(np.sum(truth & ~called)),
                    "tn": int(np.sum(~truth & ~called)),
                }
            )
        out = pd.DataFrame(rows, index=pd.Index([classes[k] for k in shown], name="class"))
        for name, values in _rates(out["tp"], out["fp"], out["fn"], out["tn"]).items():
            out[name] = values
        extra = {}
        if len(classes) > 2:
            extra["accuracy"] = float(np.mean(np.argmax(P, axis=1) == codes))
        return self._record(out, keep, **extra)

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
        bins = _check_positive_int("bins", bins)
        model, X, y, keep = self._fitted(model, target, dropna)
        classes, codes = self._codes(model, y, target)
        P = np.asarray(model.predict_proba(X))
        scores = _scores(P, codes, bins)
        if len(classes) == 2:
            table, _ = _reliability(P[:, 1], codes == 1, bins)
            out = pd.DataFrame(table)
            extra = {"positive_class": classes[1]}
        else:
            parts, by_class = [], {}
            for k, c in enumerate(classes):
                table, ece = _reliability(P[:, k], codes == k, bins)
                part = pd.DataFrame(table)
                part.insert(0, "class", c)
                parts.append(part)
                by_class[c] = ece
            out = pd.concat(parts, ignore_index=True)
            extra = {"ece_by_class": by_class}
        return self._record(
            out, keep, **scores, n=len(codes), bins=bins, classes=list(classes), **extra
        )

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
            top = _check_positive_int("top", top)
        if model is None:
            model = "tempered"
            if "tempered" not in available_models():
                warnings.warn(
                    "the tempered model is not available in this installation; scoring "
                    "doubtful labels with the Laplace model by -log P(recorded label), "
                    "which is less robust to the very label errors it looks for.",
                    UserWarning,
                    stacklevel=2,
                )
                model = "laplace"
        if isinstance(model, str) or isinstance(model, type) or not _is_fitted(model):
            model = self.fit(target, features, model, dropna=dropna)
            X, y, keep = self._frame_for(model, target, dropna, warn=False)
        else:
            X, y, keep = self._frame_for(model, target, dropna)
        classes, codes = self._codes(model, y, target)
        P = np.asarray(model.predict_proba(X))
        rows = np.arange(len(codes))
        p_rec = P[rows, codes]
        if hasattr(model, "label_doubt"):
            score = np.asarray(model.label_doubt(X, y), dtype=np.float64)
            scorer = "label_doubt"
        else:
            score = -np.log(np.clip(p_rec, np.finfo(np.float64).tiny, 1.0))
            scorer = "-log P(recorded label)"
        order = np.argsort(-score, kind="stable")
        if top is not None:
            order = order[:top]
        base = self._subset(keep)
        out = base.iloc[order].assign(
            doubt_score=score[order],
            prob_recorded_label=p_rec[order],
            most_likely_label=classes[np.argmax(P[order], axis=1)],
        )
        out.attrs = copy.deepcopy(self._df.attrs)
        return self._record(out, keep, scorer=scorer, model=_model_label(model))

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
        cv = _check_positive_int("cv", cv, minimum=2)
        feats = self._resolve_features(target, features)
        X, y, keep = self._frame(target, feats, dropna)
        counts = pd.Series(y).value_counts()
        if counts.min() < cv:
            small = ", ".join(f"{v!r} ({c})" for v, c in counts.items() if c < cv)
            raise ValueError(
                f"cv={cv} stratified folds need at least {cv} rows of every class; too few: "
                f"{small}. Use fewer folds."
            )
        n_classes = len(pd.unique(y))
        if isinstance(models, str) or hasattr(models, "fit"):
            models = [models]  # one model, not a sequence of characters
        entries = (
            list(models.items())
            if isinstance(models, Mapping)
            else [(_model_label(m), m) for m in models]
        )
        labels = [lab for lab, _ in entries]
        if len(set(labels)) != len(labels):
            raise ValueError(
                f"models have repeated labels {labels}; pass a mapping label -> model."
            )
        available = available_models()
        runnable = []
        for label, m in entries:
            if isinstance(m, str) and m in MODEL_NAMES and m not in available:
                warnings.warn(
                    f"model {m!r} is not available in this installation; skipped.",
                    UserWarning,
                    stacklevel=2,
                )
                continue
            if isinstance(m, str) and m in _BINARY_ONLY and n_classes > 2:
                warnings.warn(
                    f"model {m!r} is binary-only; skipped for {n_classes} classes.",
                    UserWarning,
                    stacklevel=2,
                )
                continue
            runnable.append((label, _build(m, {}, standardize)))
        if not runnable:
            raise ValueError("none of the models can be run on this target.")
        folds = list(StratifiedKFold(cv, shuffle=True, random_state=random_state).split(X, y))
        rows = {}
        for label, est in runnable:
            # One untimed fit first: the first fit of a model in a process
            # pays one-off numba compilation, which is not the model's speed.
            clone(est).fit(X.iloc[folds[0][0]], y[folds[0][0]])
            per_fold = []
            for train, test in folds:
                fold_model = clone(est)
                start = time.perf_counter()
                fold_model.fit(X.iloc[train], y[train])
                fit_time = time.perf_counter() - start
                P = np.asarray(fold_model.predict_proba(X.iloc[test]))
                _, codes = self._codes(fold_model, y[test], target)
                s = _scores(P, codes, bins=10)
                s["accuracy"] = float(np.mean(np.argmax(P, axis=1) == codes))
                s["fit_time"] = fit_time
                per_fold.append(s)
            fold_table = pd.DataFrame(per_fold)
            row = {}
            for name in ("accuracy", "log_loss", "brier", "ece"):
                row[name] = float(fold_table[name].mean())
            for name in ("accuracy", "log_loss", "brier", "ece"):
                row[f"{name}_sd"] = float(fold_table[name].std(ddof=1))
            row["fit_time"] = float(fold_table["fit_time"].mean())
            rows[label] = row
        out = pd.DataFrame.from_dict(rows, orient="index")
        out.index.name = "model"
        return self._record(out, keep, cv=cv, random_state=random_state, standardize=standardize)

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
        c_fp = _check_cost("cost_fp", cost_fp)
        c_fn = _check_cost("cost_fn", cost_fn)
        model, X, y, keep = self._fitted(model, target, dropna)
        classes, codes = self._codes(model, y, target)
        if len(classes) != 2:
            raise ValueError(
                f"cost_threshold needs a binary target; the model has {len(classes)} classes."
            )
        p = np.asarray(model.predict_proba(X))[:, 1]
        pos = codes == 1
        t_bayes = c_fp / (c_fp + c_fn)
        t_emp = _empirical_threshold(p, pos, c_fp, c_fn, t_bayes)
        rows = []
        for t in (t_bayes, t_emp):
            called = p >= t
            tp, fp = int(np.sum(pos & called)), int(np.sum(~pos & called))
            fn, tn = int(np.sum(pos & ~called)), int(np.sum(~pos & ~called))
            rows.append({"threshold": t, "tp": tp, "fp": fp, "fn": fn, "tn": tn})
        out = pd.DataFrame(rows, index=pd.Index(["decision_theoretic", "empirical"], name="rule"))
        rates = _rates(out["tp"], out["fp"], out["fn"], out["tn"])
        out["sensitivity"] = rates["sensitivity"]
        out["specificity"] = rates["specificity"]
        out["cost"] = c_fp * out["fp"] + c_fn * out["fn"]
        out["cost_per_row"] = out["cost"] / len(p)
        return self._record(
            out,
            keep,
            cost_fp=c_fp,
            cost_fn=c_fn,
            positive_class=classes[1],
            negative_class=classes[0],
        )

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
        if isinstance(model, str) or not _is_fitted(model):
            raise TypeError("plot_coefficients needs a fitted model.")
        if not hasattr(model, "coef_table"):
            raise TypeError(
                f"{type(model).__name__} has no posterior (no coef_table), so it has no "
                "credible intervals to plot; use the laplace or probit model."
            )
        table = model.coef_table(level)
        standardized = "estimate_original" in table.columns
        table = table[["estimate", "lower", "upper"]]
        if not include_intercept:
            names = table.index.get_level_values(-1)
            table = table[names != "intercept"]
        # The linear predictor is log-odds for the logistic models and the
        # probit index for the probit model, so the label names neither.
        unit = (
            "per standard deviation of the feature" if standardized else "per unit of the feature"
        )
        return coefficient_figure(
            table, level=float(level), xlabel=f"coefficient (linear predictor {unit})"
        )

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
        from ._checks.inputs import check_level
        from .plotting import boundary_figure, require_matplotlib

        require_matplotlib()
        level = check_level(level)
        n_draws = _check_positive_int("n_draws", n_draws, minimum=0)
        grid_size = _check_positive_int("grid_size", grid_size, minimum=10)
        if target is None:
            target = getattr(model, "target_name_", None)
            if target is None:
                raise ValueError(
                    "pass target=: the model does not record its target column "
                    "(models from df.bayeslogit.fit do)."
                )
        model, X, labels, keep = self._fitted(model, target, dropna)
        classes, _ = self._codes(model, labels, target)
        if len(classes) != 2:
            raise ValueError(
                f"plot_boundary draws a binary boundary; the model has {len(classes)} classes."
            )
        feats = list(X.columns)
        for name, arg in ((x, "x"), (y, "y")):
            if name not in feats:
                raise KeyError(
                    f"{arg}={name!r} is not a feature of the model; its features: "
                    f"{', '.join(feats)}."
                )
        if x == y:
            raise ValueError("x and y must be two different features.")
        xv, yv = X[x].to_numpy(), X[y].to_numpy()
        gx = _padded_range(xv, grid_size)
        gy = _padded_range(yv, grid_size)
        GX, GY = np.meshgrid(gx, gy)
        means = X.mean()
        grid = pd.DataFrame({f: np.full(GX.size, means[f]) for f in feats})
        grid[x] = GX.ravel()
        grid[y] = GY.ravel()
        prob = np.asarray(model.predict_proba(grid))[:, 1].reshape(GX.shape)
        band = None
        if hasattr(model, "predict_interval"):
            lo, hi = model.predict_interval(grid, level=level)
            band = ((np.asarray(lo) < 0.5) & (np.asarray(hi) > 0.5)).reshape(GX.shape)
        lines = None
        if n_draws and hasattr(model, "sample_coef"):
            draws = np.asarray(model.sample_coef(n_draws, random_state=random_state))
            d = len(feats)
            ix, iy = feats.index(x), feats.index(y)
            others = [j for j in range(d) if j not in (ix, iy)]
            fixed = means.to_numpy()[others]
            intercept = draws[:, d] if draws.shape[1] > d else np.zeros(len(draws))
            c = intercept + draws[:, others] @ fixed
            lines = np.column_stack([draws[:, ix], draws[:, iy], c])
        held = [f for f in feats if f not in (x, y)]
        notes = ["other features held at their means"] if held else []
        if lines is None and band is None:
            notes.append(f"{_model_label(model)} has no posterior: no draws or band")
        note = "; ".join(notes) or None
        return boundary_figure(
            x_name=x,
            y_name=y,
            x=xv,
            y=yv,
            labels=labels,
            classes=classes,
            grid_x=gx,
            grid_y=gy,
            grid_prob=prob,
            draw_lines=lines,
            band=band,
            level=level,
            note=note,
        )

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
        classes = table.attrs["classes"]
        scores = {
            "ECE": table.attrs["ece"],
            "Brier": table.attrs["brier"],
            "log loss": table.attrs["log_loss"],
        }
        if len(classes) == 2:
            xlabel = f"predicted probability of {classes[1]}"
        else:
            xlabel = "predicted probability of the class (each class vs the rest)"
        return calibration_figure(
            table,
            xlabel=xlabel,
            scores=scores,
            title=f"Calibration of {target} ({table.attrs['n']} rows)",
        )


# -- helpers --------------------------------------------------------------------------


def _is_numeric_dtype(dtype):
    return (
        pd.api.types.is_numeric_dtype(dtype) or pd.api.types.is_bool_dtype(dtype)
    ) and not pd.api.types.is_complex_dtype(dtype)


def _is_text(col):
    return pd.api.types.is_string_dtype(col.dtype) or isinstance(col.dtype, pd.CategoricalDtype)


def _check_cost(name, value):
    if (
        isinstance(value, bool)
        or not isinstance(value, numbers.Real)
        or not (np.isfinite(value) and value > 0)
    ):
        raise ValueError(f"{name} must be a positive finite number; got {value!r}.")
    return float(value)


def _empirical_threshold(p, pos, c_fp, c_fn, prefer):
    """Midpoint threshold of the cheapest cut of the sorted probabilities.

    Calling rows with p >= t positive, every t between two neighbouring
    distinct probabilities gives the same calls; the candidates are the
    midpoints of those gaps, plus one below the smallest and one above the
    largest probability.
    """
    u = np.unique(p)
    cuts = np.concatenate([[u[0] / 2.0], (u[:-1] + u[1:]) / 2.0, [(u[-1] + 1.0) / 2.0]])
    # Counts of negatives and positives at or above each cut, by sorting once.
    neg_sorted = np.sort(p[~pos])
    pos_sorted = np.sort(p[pos])
    fp = len(neg_sorted) - np.searchsorted(neg_sorted, cuts, side="left")
    fn = np.searchsorted(pos_sorted, cuts, side="left")
    cost = c_fp * fp + c_fn * fn
    best = np.flatnonzero(cost == cost.min())
    return float(cuts[best[np.argmin(np.abs(cuts[best] - prefer))]])


def _padded_range(values, size):
    lo, hi = float(np.min(values)), float(np.max(values))
    pad = 0.05 * (hi - lo) if hi > lo else 0.5
    return np.linspace(lo - pad, hi + pad, size)
