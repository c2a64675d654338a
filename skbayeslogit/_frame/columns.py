"""Columns of a DataFrame as a classifier's data: which ones, and the missing values.

Feature columns are either named or every numeric (and boolean) column but
the target. A NaN in a used column is an error that counts the missing
values per column, unless the caller asks to leave those rows out.
"""

import warnings
from dataclasses import dataclass

import numpy as np
import pandas as pd


class DroppedRowsWarning(UserWarning):
    """Rows with missing values were left out (``dropna=True``)."""


def is_numeric_dtype(dtype):
    """Numeric or boolean, and not complex: what a feature column may hold."""
    return (
        pd.api.types.is_numeric_dtype(dtype) or pd.api.types.is_bool_dtype(dtype)
    ) and not pd.api.types.is_complex_dtype(dtype)


def is_text(col):
    """Whether a column holds strings or categories (labels kept as objects)."""
    return pd.api.types.is_string_dtype(col.dtype) or isinstance(col.dtype, pd.CategoricalDtype)


def require_columns(df, names):
    """KeyError naming the absent columns and listing the frame's."""
    cols = list(df.columns)
    missing = [n for n in names if n not in cols]
    if missing:
        raise KeyError(
            f"column(s) not in the DataFrame: {', '.join(map(repr, missing))}; "
            f"available columns: {', '.join(map(str, cols))}."
        )


def resolve_features(df, target, features):
    """The feature column names: those given (checked), or every numeric one."""
    if features is None:
        feats = [c for c, dt in df.dtypes.items() if c != target and is_numeric_dtype(dt)]
        if not feats:
            others = [str(c) for c in df.columns if c != target]
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


@dataclass(frozen=True)
class MissingValues:
    """Where the used columns of a frame have missing values."""

    rows: np.ndarray  # bool, one per row of the frame: a used column is missing
    per_column: dict  # column -> count, only the columns with any
    n_total: int  # rows of the frame

    @classmethod
    def of(cls, df, used):
        """Count the missing values of the columns ``used`` of ``df``."""
        missing = df[list(used)].isna()
        per_col = {c: int(k) for c, k in missing.sum().items() if k}
        return cls(missing.any(axis=1).to_numpy(), per_col, len(df))

    @property
    def n_rows(self):
        """How many rows have a missing value in a used column."""
        return int(self.rows.sum())

    def listing(self, template="{column}: {count}"):
        """The per-column counts as text, one ``template`` per column."""
        return ", ".join(template.format(column=c, count=k) for c, k in self.per_column.items())


def _check_feature_columns(df, features):
    non_str = [f for f in features if not isinstance(f, str)]
    if non_str:
        raise TypeError(
            "feature column names must be strings (scikit-learn records them as "
            f"feature_names_in_); rename {', '.join(map(repr, non_str))}."
        )
    bad = [f for f in features if not is_numeric_dtype(df[f].dtype)]
    if bad:
        kinds = ", ".join(f"{f} ({df[f].dtype})" for f in bad)
        raise ValueError(
            f"non-numeric feature column(s): {kinds}. Encode them as numbers first "
            "(for example pandas.get_dummies or sklearn.preprocessing.OneHotEncoder), "
            "or leave them out of features."
        )


def _rows_kept(df, needed, dropna, warn, stacklevel):
    """Rows without a missing value in ``needed``; raise or warn as asked."""
    missing = MissingValues.of(df, needed)
    n_missing = missing.n_rows
    if n_missing and not dropna:
        raise ValueError(
            f"{n_missing} of {len(df)} rows have missing values (per column: "
            f"{missing.listing()}). Drop or impute them first, or pass dropna=True to "
            "leave those rows out."
        )
    if n_missing and warn:
        warnings.warn(
            f"dropped {n_missing} of {len(df)} rows with missing values "
            f"(per column: {missing.listing()}).",
            DroppedRowsWarning,
            stacklevel=stacklevel,
        )
    return ~missing.rows, bool(n_missing)


def _target_labels(df, target, keep, dropped):
    col = df.loc[keep, target] if dropped else df[target]
    y = np.asarray(col.to_numpy(dtype=object) if is_text(col) else col.to_numpy())
    classes = pd.unique(y)
    if len(classes) == 0:
        raise ValueError(f"no rows to fit: the frame has {len(df)} rows and none is used.")
    if len(classes) < 2:
        raise ValueError(
            f"the target {target!r} has only one class ({classes[0]!r}) among the "
            f"{len(y)} rows used; a classifier needs at least two classes."
        )
    return y


def checked_data(df, target, features, dropna, warn=True, stacklevel=2):
    """Checked features (new float64 DataFrame) and target of the used rows.

    Parameters
    ----------
    df : pandas.DataFrame
    target : column name or None
    features : list of column names (already resolved)
    dropna : bool
    warn : bool
        Emit the DroppedRowsWarning (off when the same rows were already
        reported by a fit moments before).
    stacklevel : int
        Of the warning, counted from the caller of this function.

    Returns
    -------
    X : pandas.DataFrame (n_used, d), float64, string column names
    y : ndarray (n_used,) or None
    keep : ndarray (n_rows,), bool; the rows used
    """
    needed = list(features) + ([] if target is None else [target])
    require_columns(df, needed)
    _check_feature_columns(df, features)
    keep, dropped = _rows_kept(df, needed, dropna, warn, stacklevel + 1)
    used = df.loc[keep, list(features)] if dropped else df[list(features)]
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
    y = None if target is None else _target_labels(df, target, keep, dropped)
    return X, y, keep


def model_data(df, model, target, dropna, warn=True, stacklevel=2):
    """The features a fitted model was trained on, taken from ``df``."""
    names = getattr(model, "feature_names_in_", None)
    if names is None:
        raise TypeError(
            "the model does not record its feature names (feature_names_in_); fit it "
            "on a DataFrame, for example with df.bayeslogit.fit, so that its columns "
            "can be found in this frame."
        )
    return checked_data(df, target, [str(n) for n in names], dropna, warn, stacklevel + 1)
