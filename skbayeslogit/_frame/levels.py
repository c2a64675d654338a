"""One-hot encoding of text levels through integer codes, named ``column=level``.

scikit-learn's ``OneHotEncoder`` sorts, checks and maps numeric input in
compiled code, but text input one cell at a time through Python sets and
dictionaries (``sklearn.utils._encode``, version 1.9). :class:`LevelCodes`
therefore turns each column's text into float codes (the position of the
level among the sorted levels seen in fitting; NaN for missing, -1 for a
level not seen), and :class:`CategoricalEncoder` runs the standard steps on
those codes, a ``SimpleImputer(strategy="most_frequent")`` when imputing
and a ``OneHotEncoder``, then names each output ``column=level`` from the
levels. Everything a fit learns lives in the one estimator, so ``clone``
and pickling work as for any scikit-learn transformer.
"""

import numpy as np
import pandas as pd
from sklearn.base import BaseEstimator, TransformerMixin
from sklearn.impute import SimpleImputer
from sklearn.preprocessing import OneHotEncoder

RARE_LEVELS = "(rare levels)"
UNSEEN = -1.0
_SEP = "\x00"


def _position_name(position, code):
    # The encoder's own names are "<column position><_SEP><code>", parsed back
    # into "column=level" by CategoricalEncoder.get_feature_names_out.
    return f"{position}{_SEP}{code}"


class LevelCodes(TransformerMixin, BaseEstimator):
    """Text levels to float codes into the sorted levels seen in fitting.

    Attributes
    ----------
    levels_ : list of ndarray of str
        The sorted distinct levels (as text) of each column.
    n_features_in_ : int
    """

    def fit(self, X, y=None):
        """Learn the levels of each column.

        Parameters
        ----------
        X : pandas.DataFrame or array-like, shape (n, k)
        y : ignored

        Returns
        -------
        self
        """
        frame = pd.DataFrame(X)
        self.levels_ = [
            np.array(sorted({str(u) for u in pd.unique(frame.iloc[:, j].dropna())}), dtype=str)
            for j in range(frame.shape[1])
        ]
        self.n_features_in_ = frame.shape[1]
        return self

    def transform(self, X):
        """Codes of the cells: position among ``levels_``, NaN missing, -1 unseen.

        Parameters
        ----------
        X : pandas.DataFrame or array-like, shape (n, k)

        Returns
        -------
        ndarray of float64, shape (n, k)
        """
        frame = pd.DataFrame(X)
        out = np.empty(frame.shape, dtype=np.float64)
        for j in range(frame.shape[1]):
            # The few distinct values are looked up, not every cell.
            codes, uniques = pd.factorize(frame.iloc[:, j])
            pos = pd.Index(self.levels_[j]).get_indexer([str(u) for u in uniques])
            out[:, j] = np.append(pos.astype(np.float64), np.nan)[codes]
        return out


class CategoricalEncoder(TransformerMixin, BaseEstimator):
    """Text categorical columns to one-hot columns named ``column=level``.

    Parameters
    ----------
    impute : bool, default=False
        Fill missing cells with the column's most frequent level
        (``SimpleImputer``; ties go to the first level in sort order).
    reference : dict or None, default=None
        Column -> level (as text) to drop; None keeps every level.
    handle_unknown : {"infrequent_if_exist", "ignore"}
        As in ``OneHotEncoder``: an unseen level maps to the pooled rare
        level if there is one, else to all zeros.
    max_categories, min_frequency : optional
        As in ``OneHotEncoder``: pool rare levels into ``column=(rare levels)``.

    Attributes
    ----------
    codes_ : LevelCodes
    imputer_ : SimpleImputer or None
    onehot_ : OneHotEncoder
    feature_names_in_ : ndarray of str
    n_features_in_ : int
    """

    def __init__(
        self,
        impute=False,
        reference=None,
        handle_unknown="infrequent_if_exist",
        max_categories=None,
        min_frequency=None,
    ):
        self.impute = impute
        self.reference = reference
        self.handle_unknown = handle_unknown
        self.max_categories = max_categories
        self.min_frequency = min_frequency

    def fit(self, X, y=None):
        """Learn levels, imputation values and the one-hot layout.

        Parameters
        ----------
        X : pandas.DataFrame, shape (n, k)
        y : ignored

        Returns
        -------
        self
        """
        self._fit_codes(X)
        return self

    def fit_transform(self, X, y=None):
        """Fit, then transform the same rows (their codes computed once).

        Parameters
        ----------
        X : pandas.DataFrame, shape (n, k)
        y : ignored

        Returns
        -------
        ndarray of float64, shape (n, p)
        """
        Z = self._fit_codes(X)
        return self.onehot_.transform(Z)

    def _fit_codes(self, X):
        frame = pd.DataFrame(X)
        self.feature_names_in_ = np.array([str(c) for c in frame.columns], dtype=object)
        self.n_features_in_ = frame.shape[1]
        self.codes_ = LevelCodes().fit(frame)
        Z = self.codes_.transform(frame)
        self.imputer_ = None
        if self.impute:
            self.imputer_ = SimpleImputer(strategy="most_frequent").fit(Z)
            Z = self.imputer_.transform(Z)
        drop = None
        if self.reference is not None:
            drop = [
                float(np.searchsorted(levels, str(self.reference[c])))
                for c, levels in zip(frame.columns, self.codes_.levels_, strict=True)
            ]
        self.onehot_ = OneHotEncoder(
            drop=drop,
            handle_unknown=self.handle_unknown,
            max_categories=self.max_categories,
            min_frequency=self.min_frequency,
            sparse_output=False,
            dtype=np.float64,
            feature_name_combiner=_position_name,
        ).fit(Z)
        return Z

    def transform(self, X):
        """One-hot columns of the cells (unseen levels: see ``handle_unknown``).

        Parameters
        ----------
        X : pandas.DataFrame, shape (n, k)

        Returns
        -------
        ndarray of float64, shape (n, p)
        """
        Z = self.codes_.transform(X)
        if self.imputer_ is not None:
            Z = self.imputer_.transform(Z)
        return self.onehot_.transform(Z)

    def get_feature_names_out(self, input_features=None):
        """Output names ``column=level`` (pooled rare levels: ``column=(rare levels)``).

        Returns
        -------
        ndarray of str
        """
        return np.array([f"{c}={lv}" for c, lv in self._outputs()], dtype=object)

    def output_groups(self):
        """Input column -> its output names, in output order.

        Returns
        -------
        dict
        """
        groups = {c: [] for c in self.feature_names_in_}
        for c, lv in self._outputs():
            groups[c].append(f"{c}={lv}")
        return groups

    def unseen_counts(self, X):
        """Non-missing cells of each column whose level was not seen in fitting.

        Parameters
        ----------
        X : pandas.DataFrame, shape (n, k)

        Returns
        -------
        dict
            Column -> count, for columns with at least one.
        """
        Z = self.codes_.transform(X)
        counts = (Z == UNSEEN).sum(axis=0)
        return {c: int(k) for c, k in zip(self.feature_names_in_, counts, strict=True) if k}

    def _outputs(self):
        positions = [str(j) for j in range(self.n_features_in_)]
        out = []
        for raw in self.onehot_.get_feature_names_out(positions):
            j, code = raw.split(_SEP)
            j = int(j)
            if code == "infrequent_sklearn":
                level = RARE_LEVELS
            elif code == "nan":  # missing cells met in fitting without imputation
                level = "(missing)"
            else:
                level = self.codes_.levels_[j][int(float(code))]
            out.append((self.feature_names_in_[j], level))
        return out
