"""The report's column roles: decided once, then used by every model and every table.

``skbayeslogit report`` reads a file (:mod:`~skbayeslogit._frame.reading`),
decides the role of each column here with
:func:`~skbayeslogit._frame.roles.assign_roles` (IDs, the weight column,
features, and the reason for each column left out), applies the
missing-value policy to the rows, and hands each model the same roles as
:class:`~skbayeslogit._frame.model.FrameModel` options.
"""

from dataclasses import dataclass, field

import pandas as pd

from .columns import MissingValues
from .model import default_positive
from .roles import assign_roles


@dataclass
class ColumnChoice:
    """What the report decided about the columns and rows.

    Attributes
    ----------
    table : pandas.DataFrame
        One row per input column (``columns.csv``): column, role, kind,
        reason, missing, distinct.
    features, ids : list of str
    weight : str or None
    positive : label or None
    fit_options : dict
        The FrameModel keywords every model is fitted with.
    statements : list of str
        Decisions taken without being told.
    """

    table: pd.DataFrame
    features: list
    ids: list
    weight: str | None
    positive: object
    fit_options: dict
    statements: list = field(default_factory=list)


def choose_columns(df, target, options, reading=None):
    """Decide the role of every column of ``df``.

    Parameters
    ----------
    df : pandas.DataFrame
    target : str
    options : dict
        ``features``, ``id``, ``exclude`` (lists or None), ``weight``,
        ``positive``, ``max_levels``, ``missing`` ("error", "drop" or
        "impute").
    reading : ReadResult, optional
        Its saved index columns and unparsed cells inform the roles.

    Returns
    -------
    ColumnChoice
    """
    classes = pd.unique(df[target].dropna())
    if len(classes) < 2:
        shown = f" ({classes[0]!r})" if len(classes) else ""
        raise ValueError(
            f"the target {target!r} has only one class{shown} among its non-missing "
            "values; a classifier needs at least two classes."
        )
    positive = options.get("positive")
    if positive is None:
        positive = default_positive(df[target])
    roles = assign_roles(
        df, target, features=options.get("features"), exclude=options.get("exclude"),
        id=options.get("id"), weight=options.get("weight"), positive=positive,
        max_levels=options.get("max_levels", 20),
        index_columns=reading.index_columns if reading is not None else (),
        unparsed=reading.unparsed if reading is not None else None,
    )  # fmt: skip
    statements = list(roles.statements)
    if options.get("positive") is None and roles.positive is not None:
        statements = [
            s if not s.startswith("positive class") else
            f"positive class of {target!r}: {roles.positive!r} (the second class in sorted "
            "order; pass --positive to choose)"
            for s in statements
        ]  # fmt: skip
    features = roles.features
    if options.get("features"):
        features = [c for c in options["features"] if c in features]
    fit_options = {
        "features": features,
        "id": roles.ids or None,
        "weight": roles.weight,
        "positive": roles.positive,
        "max_levels": options.get("max_levels", 20),
        "missing": "impute" if options.get("missing") == "impute" else "error",
    }
    return ColumnChoice(
        table=roles.table,
        features=features,
        ids=list(roles.ids),
        weight=roles.weight,
        positive=roles.positive,
        fit_options=fit_options,
        statements=statements,
    )


def used_rows(df, target, feats, policy, notes):
    """The rows the report uses under ``policy``; missing values raise or are noted.

    Parameters
    ----------
    df : pandas.DataFrame
    target : str
    feats : list of str
    policy : {"error", "drop", "impute"}
        "impute": only rows without a label are left out (the models fill
        the features).
    notes : list of str
        Receives a line on the rows left out.

    Returns
    -------
    pandas.DataFrame
    """
    used = [target] if policy == "impute" else [*feats, target]
    missing = MissingValues.of(df, used)
    if not missing.n_rows:
        return df
    if policy == "error":
        raise ValueError(
            f"{missing.n_rows} of {len(df)} rows have missing values, by column: "
            f"{missing.listing('{column} ({count})')}. Drop or impute them, or pass "
            "--missing drop (or --dropna) to leave those rows out, or --missing impute."
        )
    empty = [c for c, k in missing.per_column.items() if k == len(df)]
    if empty:
        raise ValueError(
            f"column(s) {', '.join(map(repr, empty))} hold no values at all, so --dropna "
            "would leave no rows; leave them out of --features or fill them."
        )
    out = df.dropna(subset=used)
    if len(out) == 0:
        raise ValueError(
            f"every one of the {missing.n_total} rows has a missing value (by column: "
            f"{missing.listing('{column} ({count})')}), so --dropna leaves no rows."
        )
    why = "without a label" if policy == "impute" else "with missing values"
    option = "--missing impute" if policy == "impute" else "--missing drop"
    notes.append(f"{missing.n_rows} row(s) {why} were left out ({option}).")
    return out


def columns_text(table):
    """One line per column: its role, kind, and why a left-out column is out.

    Parameters
    ----------
    table : pandas.DataFrame
        The ``columns.csv`` table.

    Returns
    -------
    list of str
    """
    width = max(len(str(c)) for c in table["column"])
    lines = []
    for row in table.itertuples(index=False):
        reason = f": {row.reason}" if row.role != "feature" and row.reason else ""
        lines.append(f"{str(row.column):<{width}}  {row.role} ({row.kind}){reason}")
    return lines


def evidence_by_model(models):
    """Column evidence (Bayes factor per original column) of the models that give one.

    Parameters
    ----------
    models : dict of str to fitted FrameModel

    Returns
    -------
    dict of str to pandas.DataFrame
    """
    out = {}
    for name, model in models.items():
        try:
            out[name] = model.column_evidence()
        except (TypeError, AttributeError, NotImplementedError):
            continue
    return out
