"""Column roles, decided once: target, feature, weight, ID, or left out with a reason.

Every input column gets exactly one role in a :class:`ColumnRoles`; its
``table`` has one row per input column (name, role, kind, reason, missing
count, distinct count) and is what the report shows as ``columns.csv``.
Explicit choices (``target=``, ``features=``, ``id=``, ``exclude=``,
``weight=``) win; otherwise the rules below decide, each saying why:

- a copy of the target (equal values, one-to-one with it, or a name that
  pandas gives a duplicated header, ``grade.1``) is an error unless
  excluded: fitting it would only measure the leak;
- a saved row index (``Unnamed: 0`` or a column reading reported) is left out;
- an ID is taken by its name (``id``, ``key``, ``number``, ``no``, ``code``
  or ``uuid`` as the whole name or its last word: ``lot_id``, ``CustomerID``,
  ``Case No``; not ``valid`` or ``width``) when it holds integers or text, or
  by its values (integers or text distinct in at least 99% of at least 20 rows);
- all-missing and constant columns are left out;
- text, boolean and pandas ``category`` columns with at most ``max_levels``
  distinct values are categorical features; with more, they are left out as
  likely free text or an ID; numeric-looking text is left out naming a cell
  that is not a number; dates are left out.
"""

import re
import warnings
from dataclasses import dataclass, field

import numpy as np
import pandas as pd

from .errors import FrameInputError, LabelVariantWarning
from .reading import parse_number_text

ID_WORDS = frozenset({"id", "key", "number", "no", "code", "uuid"})
ID_DISTINCT_SHARE = 0.99
ID_MIN_ROWS = 20
_INDEX_NAME = re.compile(r"^Unnamed: \d+$")
_TABLE_COLUMNS = ["column", "role", "kind", "reason", "missing", "distinct"]


@dataclass
class ColumnRoles:
    """The role of every input column.

    Attributes
    ----------
    table : pandas.DataFrame
        One row per input column: column, role ("target", "feature",
        "weight", "id", "left out"), kind ("numeric", "categorical",
        "text", "date", "empty"), reason, missing, distinct.
    target : str
    numeric, categorical : list of str
        Feature columns by kind, in input order.
    weight : str or None
    ids : list of str
    classes : tuple
        The target's classes; for a binary target the positive class last.
    positive : object or None
        The positive class of a binary target.
    statements : list of str
        One line per decision taken without being told (IDs by name or
        values, the positive class, left-out columns).
    """

    table: pd.DataFrame
    target: str
    numeric: list = field(default_factory=list)
    categorical: list = field(default_factory=list)
    weight: str | None = None
    ids: list = field(default_factory=list)
    classes: tuple = ()
    positive: object = None
    statements: list = field(default_factory=list)

    @property
    def features(self):
        """Numeric then categorical feature columns."""
        return self.numeric + self.categorical

    def target_codes(self, df):
        """Integer codes of the target into ``classes`` (-1 where missing or unknown).

        Parameters
        ----------
        df : pandas.DataFrame

        Returns
        -------
        ndarray of int64, shape (n_rows,)
        """
        return codes_into(df[self.target], self.classes)


def _names(value, what, columns):
    if value is None:
        return []
    names = [value] if isinstance(value, str) else list(value)
    unknown = [n for n in names if n not in columns]
    if unknown:
        raise FrameInputError(
            f"{what} names column(s) not in the table: {', '.join(map(repr, unknown))}."
        )
    return names


def _is_id_name(name):
    words = re.sub(r"([a-z0-9])([A-Z])", r"\1 \2", str(name))
    words = [w for w in re.split(r"[^A-Za-z0-9]+", words.lower()) if w]
    return bool(words) and words[-1] in ID_WORDS


@dataclass
class _Facts:
    """What every rule needs to know about a column, computed once."""

    codes: np.ndarray
    uniques: object
    missing: int
    distinct: int
    kind: str


def _facts(col):
    dtype = col.dtype
    if pd.api.types.is_numeric_dtype(dtype) and not pd.api.types.is_bool_dtype(dtype):
        # Sorting is cheaper than hashing many distinct floats; the codes are
        # only needed when the column has few values (see _is_target_copy).
        values = col.to_numpy(dtype=np.float64, na_value=np.nan)
        present = values[~np.isnan(values)]
        uniques = np.unique(present)
        kind = "numeric" if len(uniques) else "empty"
        return _Facts(None, uniques, len(values) - len(present), len(uniques), kind)
    codes, uniques = pd.factorize(col)
    missing = int((codes < 0).sum())
    return _Facts(codes, uniques, missing, len(uniques), _kind(col, uniques))


def codes_into(col, classes):
    """Integer codes of ``col`` into ``classes`` (-1 where missing or not a class).

    Parameters
    ----------
    col : pandas.Series
    classes : sequence

    Returns
    -------
    ndarray of int64
    """
    codes, uniques = pd.factorize(col)
    where = np.append(pd.Index(list(classes)).get_indexer(uniques), -1).astype(np.int64)
    return where[codes]


def _kind(col, uniques):
    dtype = col.dtype
    if len(uniques) == 0:
        return "empty"
    if pd.api.types.is_bool_dtype(dtype) or isinstance(dtype, pd.CategoricalDtype):
        return "categorical"
    if pd.api.types.is_numeric_dtype(dtype):
        return "numeric"
    if pd.api.types.is_datetime64_any_dtype(dtype) or isinstance(dtype, pd.PeriodDtype):
        return "date"
    if pd.api.types.is_object_dtype(dtype):
        if all(isinstance(u, bool | np.bool_) for u in uniques):
            return "categorical"
    return "text"


def _is_target_copy(facts, col, name, target, tcodes):
    if re.fullmatch(re.escape(str(target)) + r"\.\d+", str(name)):
        return "a renamed duplicate of the target header"
    k = int(tcodes.max()) + 1
    n_unlabelled = int((tcodes < 0).sum())
    # A one-to-one column has exactly k values on the labelled rows.
    if not k <= facts.distinct <= k + n_unlabelled:
        return None
    seen = tcodes >= 0
    if facts.codes is None:  # numeric: uniques are sorted, no hashing needed
        values = col.to_numpy(dtype=np.float64, na_value=np.nan)[seen]
        if np.isnan(values).any():
            return None
        codes = np.searchsorted(facts.uniques, values).astype(np.int64)
    else:
        codes = facts.codes[seen].astype(np.int64)
        if codes.min() < 0:
            return None
    pairs = np.bincount(codes * k + tcodes[seen], minlength=k * (codes.max() + 1))
    used = np.count_nonzero(np.bincount(codes))
    return "one-to-one with the target" if used == k and np.count_nonzero(pairs) == k else None


def _auto_id(facts, col, name, n):
    if not (pd.api.types.is_integer_dtype(col.dtype) or facts.kind == "text"):
        return None
    if _is_id_name(name):
        return "taken as an ID by its name"
    if n >= ID_MIN_ROWS and facts.distinct >= ID_DISTINCT_SHARE * n:
        return f"taken as an ID: {facts.distinct} distinct values in {n} rows"
    return None


def _feature_or_reason(facts, col, max_levels, unparsed):
    """('feature', kind) or ('left out', reason) for a column with no explicit role."""
    kind, distinct = facts.kind, facts.distinct
    if kind == "empty":
        return "left out", "all values missing"
    if distinct == 1:
        value = facts.uniques[0]
        value = value.item() if isinstance(value, np.generic) else value
        return "left out", f"constant (every value is {value!r})"
    if kind == "date":
        return "left out", "dates are not used as features; derive numbers from them first"
    if kind == "numeric":
        return "feature", "numeric"
    if kind == "text":
        example = unparsed.get(col.name)
        if example is None:
            _, _, why, example = parse_number_text(col, factorized=(facts.codes, facts.uniques))
            if example is not None:
                return "left out", why
        else:
            return "left out", f"numeric-looking text; the cell {example!r} is not a number"
    if distinct > max_levels:
        return "left out", (
            f"{distinct} distinct values > max_levels={max_levels} (likely free text or an ID)"
        )
    return "feature", f"categorical, {distinct} levels"


def _row(name, facts, role, kind, reason):
    return {
        "column": name,
        "role": role,
        "kind": kind,
        "reason": reason,
        "missing": facts.missing,
        "distinct": facts.distinct,
    }


def assign_roles(
    df,
    target,
    *,
    features=None,
    exclude=None,
    id=None,
    weight=None,
    positive=None,
    max_levels=20,
    index_columns=(),
    unparsed=None,
):
    """Decide the role of every column of ``df``.

    Parameters
    ----------
    df : pandas.DataFrame
        Not modified.
    target : str
    features, exclude, id : str or list of str, optional
        Lists, not comma-separated strings (column names may hold commas).
        With ``features``, every other column without a role is left out.
    weight : str, optional
        Frequency weights: finite, non-negative, not all zero, no missing.
    positive : object, optional
        The positive class of a binary target (matched to a label directly
        or by its text). Default: an ordered Categorical's last category,
        else the minority class.
    max_levels : int, default=20
    index_columns : sequence of str
        Saved row-index columns found by reading.
    unparsed : dict, optional
        Column -> a cell that reading could not parse as a number.

    Returns
    -------
    ColumnRoles

    Raises
    ------
    FrameInputError
        Unknown columns, a column given two roles, a copy of the target
        not excluded, an explicit feature that cannot be used, a bad weight
        column, a target with fewer than two classes.
    """
    columns = list(df.columns)
    if not isinstance(max_levels, int | np.integer) or max_levels < 2:
        raise FrameInputError(f"max_levels must be an integer >= 2; got {max_levels!r}.")
    if target not in columns:
        raise FrameInputError(f"target column {target!r} not in the table.")
    given = {
        "features=": _names(features, "features=", columns),
        "exclude=": _names(exclude, "exclude=", columns),
        "id=": _names(id, "id=", columns),
        "weight=": _names(weight, "weight=", columns),
    }
    _check_overlaps(target, given)
    classes, positive, statements = _target_classes(df[target], target, positive)
    tcodes = codes_into(df[target], classes)
    tfacts = _facts(df[target])
    rows = [_row(target, tfacts, "target", tfacts.kind, "given as target=")]
    context = (target, tcodes, given, max_levels, set(index_columns), unparsed or {}, len(df))
    for name in columns:
        if name != target:
            rows.append(_decide(df[name], name, context, statements))
    table = pd.DataFrame(rows, columns=_TABLE_COLUMNS)
    if weight is not None:
        _check_weight(df[given["weight="][0]], given["weight="][0])
    feats = table[table["role"] == "feature"]
    if feats.empty:
        raise FrameInputError(f"no usable feature columns besides the target {target!r}.")
    return ColumnRoles(
        table=table,
        target=target,
        numeric=list(feats.loc[feats["kind"] == "numeric", "column"]),
        categorical=list(feats.loc[feats["kind"] == "categorical", "column"]),
        weight=given["weight="][0] if given["weight="] else None,
        ids=list(table.loc[table["role"] == "id", "column"]),
        classes=classes,
        positive=positive,
        statements=statements,
    )


def _check_overlaps(target, given):
    if len(given["weight="]) > 1:
        raise FrameInputError("weight= takes one column.")
    for what, names in given.items():
        if target in names:
            raise FrameInputError(f"the target {target!r} is also given in {what}.")
        dup = sorted({str(n) for n in names if names.count(n) > 1})
        if dup:
            raise FrameInputError(f"{what} lists column(s) more than once: {', '.join(dup)}.")
    items = list(given.items())
    for i, (wa, a) in enumerate(items):
        for wb, b in items[i + 1 :]:
            both = [n for n in a if n in b]
            if both:
                raise FrameInputError(
                    f"column {both[0]!r} is given in both {wa} and {wb}; give it one role."
                )


def _decide(col, name, context, statements):
    target, tcodes, given, max_levels, index_cols, unparsed, n = context
    facts = _facts(col)
    kind = facts.kind
    explicit = name in given["features="]
    if name in given["exclude="]:
        return _row(name, facts, "left out", kind, "given in exclude=")
    if name in given["id="]:
        return _row(name, facts, "id", kind, "given as id=")
    if name in given["weight="]:
        return _row(name, facts, "weight", kind, "given as weight=")
    if given["features="] and not explicit:
        # Not used, so not a leak even when it copies the target.
        return _row(name, facts, "left out", kind, "not among features=")
    copy = _is_target_copy(facts, col, name, target, tcodes)
    if copy:
        raise FrameInputError(
            f"column {name!r} is {copy} {target!r}; a feature like it leaks the label: "
            f"drop it or pass exclude=[{name!r}]."
        )
    if name in index_cols or _INDEX_NAME.fullmatch(str(name)):
        if explicit:
            raise FrameInputError(f"column {name!r} is a saved row index, not a feature.")
        return _row(name, facts, "left out", kind, "saved row index (pandas-added column)")
    if not explicit:
        why = _auto_id(facts, col, name, n)
        if why:
            statements.append(f"column {name!r} {why}; pass features=[...] to use it")
            return _row(name, facts, "id", kind, why)
    role, reason = _feature_or_reason(facts, col, max_levels, unparsed)
    if role == "left out" and explicit and kind == "numeric" and facts.distinct == 1:
        # Asked for by name: a constant number is harmless (its slope is not
        # identified without a prior, and the estimator says so).
        return _row(name, facts, "feature", kind, "given in features= (constant)")
    if role == "left out":
        if explicit:
            raise FrameInputError(f"feature column {name!r} cannot be used: {reason}.")
        statements.append(f"column {name!r} left out: {reason}")
        return _row(name, facts, role, kind, reason)
    kind = reason.split(",")[0]
    return _row(name, facts, "feature", kind, "given in features=" if explicit else reason)


def _check_weight(col, name):
    if not pd.api.types.is_numeric_dtype(col.dtype) or pd.api.types.is_bool_dtype(col.dtype):
        raise FrameInputError(f"weight column {name!r} is not numeric ({col.dtype}).")
    w = col.to_numpy(dtype=np.float64, na_value=np.nan)
    if not np.all(np.isfinite(w)):
        raise FrameInputError(
            f"weight column {name!r} has {int((~np.isfinite(w)).sum())} missing or infinite "
            "values; frequency weights must be finite."
        )
    if np.any(w < 0) or not np.any(w > 0):
        raise FrameInputError(
            f"weight column {name!r} must be non-negative with a positive sum "
            f"(min {w.min():g}, sum {w.sum():g})."
        )


def _target_classes(col, target, positive):
    """Classes (positive last for binary), the positive class and the statements."""
    observed = col.dropna()
    if pd.api.types.is_float_dtype(col.dtype) and np.any(np.mod(observed.to_numpy(), 1) != 0):
        raise FrameInputError(
            f"target {target!r} holds non-integer numbers; a classifier needs class labels."
        )
    counts = observed.value_counts(sort=False)
    counts = counts[counts > 0]
    if len(counts) < 2:
        raise FrameInputError(
            f"target {target!r} has {len(counts)} class(es) among its non-missing values; "
            "a classifier needs at least two."
        )
    statements = []
    _warn_label_variants(counts.index, target, statements)
    if len(counts) > 2:
        if positive is not None:
            raise FrameInputError(
                f"positive= applies to a binary target; {target!r} has {len(counts)} classes."
            )
        return tuple(_sorted_labels(counts.index)), None, statements
    pos, why = _choose_positive(col, counts, target, positive)
    neg = next(c for c in counts.index if c != pos)
    statements.append(f"positive class of {target!r}: {pos!r} ({why})")
    return (neg, pos), pos, statements


def _sorted_labels(labels):
    try:
        return sorted(labels)
    except TypeError:
        return sorted(labels, key=str)


def _choose_positive(col, counts, target, positive):
    labels = list(counts.index)
    if positive is not None:
        match = [c for c in labels if c == positive] or [
            c for c in labels if str(c) == str(positive)
        ]
        if len(match) != 1:
            raise FrameInputError(
                f"positive={positive!r} is not a class of {target!r} "
                f"(classes: {', '.join(map(repr, labels))})."
            )
        return match[0], "given as positive="
    if isinstance(col.dtype, pd.CategoricalDtype) and col.dtype.ordered:
        last = [c for c in col.dtype.categories if c in labels][-1]
        return last, "the last category of the ordered categorical"
    n = len(col.dropna())
    if counts.iloc[0] != counts.iloc[1]:
        pos = counts.idxmin()
        return pos, f"the minority class: {int(counts[pos])} of {n} rows"
    pos = _sorted_labels(labels)[-1]
    return pos, f"the classes tie at {int(counts.iloc[0])} rows each; took the last in sort order"


def _warn_label_variants(labels, target, statements):
    groups = {}
    for lab in labels:
        if isinstance(lab, str):
            groups.setdefault(lab.strip().casefold(), []).append(lab)
    for variants in groups.values():
        if len(variants) > 1:
            msg = (
                f"target {target!r} has labels that differ only by case or spaces: "
                f"{', '.join(map(repr, variants))}; they are fitted as different classes"
            )
            statements.append(msg)
            warnings.warn(msg, LabelVariantWarning, stacklevel=4)
