"""Rows whose recorded label the model finds improbable, ranked fairly across classes.

Both the choice of rows and their order use the model's probabilities *as
if every class were equally common*: each class probability is divided by
the class's share of the recorded labels and the row renormalised (the
prior-shift adjustment of Saerens, Latinne & Decaestecker, "Adjusting the
outputs of a classifier to new a priori probabilities", Neural Computation
14, 2002, with equal new priors), giving ``q``.

Which rows are listed
---------------------
A row is on the list when its recorded label is improbable by ``q``: it is
not the most probable class, or its probability is below
:data:`PROBABILITY_CUT`. Where the classes are about equally common this is
the model's own verdict (its most probable class is another one). Where one
class is common, a row of it can be listed while the model's most probable
label is still its own: its measurements are more typical of another class,
and only the common class's frequency keeps it ahead. The table shows the
model's own most probable label and probability, so a reader sees both.

How they are ranked
-------------------
By the odds against the recorded label, ``(1 - q_r) / q_r`` for the
recorded class r. For two classes this is exactly the posterior odds
against the recorded label divided by its prior odds, that is the
likelihood ratio ``P(x | other class) / P(x | recorded class)``: how much
more typical the row's measurements are of the other class than of the one
recorded.

Why not the plain probability of the recorded label: a rare class gets a
low probability on almost every one of its rows merely because it is rare,
so ranking by that probability fills the list with the rare class. Dividing
by the class's share removes what the model knows from the class
frequencies alone and keeps what the row's measurements say.

What this assumes, and when it loses: the adjustment is the right ranking
when recording errors land on classes in proportion to how common they are
(a wrong label is seldom a rare one). When instead every true class is
mislabelled at the same rate, a rare class collects many wrong labels from
a common one, and the plain probability ranks those better. Measured
against the invented orchard demo's flipped labels (``skbayeslogit.datasets``;
``tests/test_doubtful.py`` prints and checks them): where the two classes are
about equally common the two rankings agree but for the order of a few rows
(within one row in the top 20 of the demo); on three classes this one is
ahead; with one class rare and its labels mostly genuine it is far ahead,
and with a rare class made of the common one's wrong labels far behind.
"""

import numpy as np
import pandas as pd

#: A recorded label with an adjusted probability below this is listed even
#: when it is the most probable class (only possible with more than ten
#: classes).
PROBABILITY_CUT = 0.1

#: The score column of the doubtful list.
SCORE = "odds_against_label"


def class_shares(codes, n_classes, weights=None):
    """Each class's share of the recorded labels (weighted by ``weights`` when given).

    Parameters
    ----------
    codes : ndarray of shape (n,), int
        Index of each recorded label in the model's classes.
    n_classes : int
    weights : ndarray of shape (n,), optional
        Frequency weights.

    Returns
    -------
    ndarray of shape (n_classes,)
    """
    counts = np.bincount(codes, weights=weights, minlength=n_classes).astype(np.float64)
    return counts / counts.sum()


def balanced_odds_against(P, codes, shares):
    """Odds against the recorded label with every class equally common.

    Parameters
    ----------
    P : ndarray of shape (n, K)
        The model's class probabilities.
    codes : ndarray of shape (n,), int
    shares : ndarray of shape (K,)
        The classes' shares of the recorded labels (all > 0: every class
        has at least one recorded row).

    Returns
    -------
    ndarray of shape (n,)
        ``(1 - q_r) / q_r`` with ``q = (P / shares)`` renormalised per row;
        ``inf`` when the recorded label has probability 0.
    """
    Q = np.asarray(P, dtype=np.float64) / shares
    rows = np.arange(len(codes))
    own = Q[rows, codes]
    other = Q.sum(axis=1) - own
    with np.errstate(divide="ignore"):
        return np.where(own > 0, other / np.where(own > 0, own, 1.0), np.inf)


def improbable(P, codes, shares, cut=PROBABILITY_CUT):
    """Whether each recorded label is improbable with every class equally common.

    Parameters
    ----------
    P : ndarray of shape (n, K)
    codes : ndarray of shape (n,), int
    shares : ndarray of shape (K,)
    cut : float

    Returns
    -------
    ndarray of shape (n,), bool
        The recorded label is not the most probable class of the adjusted
        probabilities ``q``, or its ``q`` is below ``cut``.
    """
    Q = np.asarray(P, dtype=np.float64) / shares
    Q /= Q.sum(axis=1, keepdims=True)
    q_rec = Q[np.arange(len(codes)), codes]
    return (np.argmax(Q, axis=1) != codes) | (q_rec < cut)


def doubtful_table(rows, P, codes, classes, target, *, lines, ids, weights=None):
    """The complete doubtful list, most doubtful first.

    Parameters
    ----------
    rows : pandas.DataFrame
        The rows the model was fitted on (their ID and target columns are
        copied).
    P : ndarray of shape (n, K)
    codes : ndarray of shape (n,), int
    classes : ndarray of shape (K,)
    target : str
    lines : array-like of shape (n,), int
        Each row's line number (see ``Report.doubtful``).
    ids : list of str
        ID columns, shown first.
    weights : ndarray of shape (n,), optional
        Frequency weights: class shares count rows by weight.

    Returns
    -------
    pandas.DataFrame
        Columns: the ID columns, ``line``, the target (the recorded label),
        ``most_likely_label``, ``prob_recorded_label`` and
        :data:`SCORE`; one row per listed row, ranked by the score (ties in
        row order). ``attrs``: ``cut``, ``class_shares`` (class -> share),
        ``n_rows`` (rows checked).
    """
    P = np.asarray(P, dtype=np.float64)
    shares = class_shares(codes, len(classes), weights)
    score = balanced_odds_against(P, codes, shares)
    listed = np.flatnonzero(improbable(P, codes, shares))
    order = listed[np.argsort(-score[listed], kind="stable")]
    out = pd.DataFrame({c: rows[c].to_numpy()[order] for c in ids}, index=rows.index[order])
    out["line"] = np.asarray(lines)[order]
    out[target] = rows[target].to_numpy()[order]
    out["most_likely_label"] = np.asarray(classes)[np.argmax(P[order], axis=1)]
    out["prob_recorded_label"] = P[order, codes[order]]
    out[SCORE] = score[order]
    out.attrs.update(
        cut=PROBABILITY_CUT,
        class_shares={str(c): float(s) for c, s in zip(classes, shares, strict=True)},
        n_rows=len(codes),
    )
    return out


def precision_at(listed_ids, wrong_ids, k):
    """Share of the first ``k`` listed rows that are in ``wrong_ids`` (NaN for an empty list)."""
    top = list(listed_ids)[:k]
    if not top:
        return float("nan")
    wrong = set(wrong_ids)
    return sum(1 for i in top if i in wrong) / len(top)
