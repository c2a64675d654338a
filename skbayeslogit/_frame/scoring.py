"""Score new rows with a saved model: ``skbayeslogit score``.

A saved :class:`~skbayeslogit._frame.model.FrameModel` encodes the new rows
exactly as it encoded the training rows. A row that cannot be scored (a
missing feature cell, under a model fitted without imputation) gets empty
probabilities and a reason in the ``note`` column instead of stopping the
batch; levels not seen in fitting are scored as no level and counted.
"""

import numpy as np
import pandas as pd

from .model import FrameModel


def score_rows(df, model, level):
    """Probabilities, credible bounds and labels of every row of ``df``.

    Parameters
    ----------
    df : pandas.DataFrame
        Holds the model's feature columns; not modified.
    model : fitted estimator
        A FrameModel, or an older model with ``feature_names_in_``.
    level : float in (0, 1)

    Returns
    -------
    table : pandas.DataFrame
        The ID columns the model knows (those present), then the new
        columns, then ``note`` (empty where the row was scored).
    messages : list of str
        Rows left unscored and unseen levels, one line each.
    """
    feats = [str(c) for c in model.feature_names_in_]
    imputes = isinstance(model, FrameModel) and model.missing == "impute"
    gaps = pd.DataFrame(False, index=df.index, columns=feats)
    if not imputes:
        gaps = df[feats].isna()
    bad = gaps.any(axis=1).to_numpy()
    ids = [c for c in getattr(model, "id_columns_", []) if c in df.columns]
    good = df.loc[~bad]
    messages = []
    if len(good):
        found = good.bayeslogit.predict_table(model, level=level)
        new = found[[c for c in found.columns if c not in df.columns]]
        unseen = found.attrs.get("unseen_levels") or {}
        messages += [
            f"{k} cell(s) of {c!r} hold a level not seen in fitting (scored as no level)"
            for c, k in unseen.items()
        ]
    else:
        new = pd.DataFrame(index=good.index)
    table = pd.concat([df[ids], new.reindex(df.index)], axis=1)
    notes = np.where(
        bad,
        ["missing value in: " + ", ".join(np.array(feats)[row]) for row in gaps.to_numpy()],
        "",
    )
    table["note"] = notes
    if bad.any():
        messages.append(
            f"{int(bad.sum())} of {len(df)} row(s) have a missing feature value and were not "
            "scored (empty probabilities; the reason is in the note column)"
        )
    return table, messages
