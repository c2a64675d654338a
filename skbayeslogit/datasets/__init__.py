"""Invented demo data: an orchard cooperative's apple-lot intake log.

Everything here is simulated from a seed; no row describes a real orchard,
lot or grader. The scenario gives examples, documentation and the report's
demo a data set whose ground truth is known exactly, including which labels
were corrupted.

Scenario
--------
A cooperative measures every apple lot at intake and a grader decides its
``storage_grade``. One row is one lot:

======================  =======  ==============================================
column                  dtype    meaning (range)
======================  =======  ==============================================
``lot_id``              str      ``"L0001"``, ``"L0002"``, ... (unique)
``orchard``             str      orchard block, one of five invented names;
                                 shifts bloom timing and fruit size, but has no
                                 effect on the grade given the measurements
``firmness_n``          float    flesh firmness, newtons, 0.1 N (50 - 90)
``soluble_solids_brix`` float    soluble solids, degrees Brix, 0.1 (10 - 16)
``starch_index``        int      starch-pattern index (1 - 8); rises with
                                 ripeness
``days_since_bloom``    int      days from full bloom to harvest (120 - 170)
``fruit_mass_g``        int      mean fruit mass, grams (120 - 260)
``bruise_share_pct``    float    share of bruised fruit, percent, 0.1 (0 - 15)
``intake_temp_c``       float    air temperature at intake, deg C (2 - 28);
                                 pure noise: independent of every other column
                                 and of the grade
``storage_grade``       str      the grader's label (possibly corrupted)
======================  =======  ==============================================

The measurements are correlated the way ripening makes them: a latent
ripeness grows with ``days_since_bloom``; starch index and soluble solids rise
with it, firmness falls with it (and with fruit mass), bruising grows a little
with it.

Ground truth
------------
Labels are drawn from a logistic (binary) or softmax (three-class) model that
is linear in the standardised features ``z_j = (x_j - center_j) / scale_j``,
with the fixed constants below (close to, not exactly, the population mean and
standard deviation; they are stored in ``df.attrs`` so a fit on the same
scale can be compared with the truth exactly).

=======================  ======  =====  ==========  ==============  ==========
feature                  center  scale  binary:     three-class vs  reference
                                        long_stor.  fresh_market    long_stor.
=======================  ======  =====  ==========  ==============  ==========
intercept                                    0.30            0.30       -0.40
``firmness_n``             70.5   7.80       1.20            0.70        1.50
``soluble_solids_brix``    13.0   1.15       0.60            0.80        0.50
``starch_index``            4.6   1.70      -0.90           -0.20       -1.00
``days_since_bloom``      145.5   9.50      -0.30            0.00       -0.30
``fruit_mass_g``          191.5  26.70      -0.40            0.30       -0.20
``bruise_share_pct``        3.0   2.60      -1.00           -0.90       -1.60
``intake_temp_c``          14.0   3.50       0.00            0.00        0.00
=======================  ======  =====  ==========  ==============  ==========

* Binary: classes ``["early_sale", "long_storage"]`` (sorted, so
  ``long_storage`` is ``classes_[1]`` in scikit-learn's order);
  ``P(long_storage | x) = sigmoid(intercept + z @ coef)``. About 55 % of clean
  labels are ``long_storage``.
* Three classes: ``["fresh_market", "juice", "long_storage"]``; softmax with
  ``juice`` as the reference class (linear predictor fixed at 0). Only
  differences between classes are identified, so compare a fit's
  ``coef_[k] - coef_[juice]`` with the columns above. Each class holds about a
  third of the clean labels.

On the original scale a coefficient is ``coef_j / scale_j`` and the intercept
is ``intercept - sum_j coef_j * center_j / scale_j``; ``df.attrs`` holds both.

Label corruption
----------------
After the clean labels are drawn, the rows are split in two halves by their
distance to the true decision boundary (the gap between the two largest true
linear predictors): the ``n_lots // 2`` rows farthest from it form the *far*
half, the others the *near* half. Exactly ``round(flip_far * n_far)`` labels
of the far half are flipped, sampled at random among its rows whose clean
label agrees with the truth's most probable class (so each far flip overturns
a label the truth was confident about), and exactly
``round(flip_near * n_near)`` labels of the near half, sampled at random.
A share is therefore the share of *that half's* labels, so even
``flip_far=0.3`` leaves the correct labels a majority everywhere: the
setting in which a bounded loss can tell the mislabelled rows apart. A
flipped binary label takes the other class; a flipped three-class label
takes one of the two other classes at random. ``round`` is Python's (half to
even).

Where the truth lives
---------------------
Only in ``df.attrs`` (plain lists, dicts, floats and strings: JSON and pickle
friendly), never in columns, so a fit on "every numeric column but the target"
cannot pick it up. The per-row truth is kept small on purpose: pandas deep
copies ``attrs`` into every derived frame, so only the corrupted rows are
listed (by ``lot_id``); the true probabilities are an exact function of the
recorded measurements and :func:`orchard_ground_truth` rebuilds them.
"""

from __future__ import annotations

import numbers
import operator

import numpy as np
import pandas as pd
from scipy.special import softmax

from ._simulation import (  # noqa: F401  (importable here as before)
    ORCHARDS,
    check_params,
    check_random_state,
    flip_counts,
    lot_ids,
    simulate,
    split_halves,
)
from ._truth import (
    FEATURES,
    NOISE_FEATURES,
    TARGET,
    linear_predictor,
    margins,
    require_truth,
    to_standard_scale,
)

__all__ = [
    "FEATURES",
    "NOISE_FEATURES",
    "TARGET",
    "make_orchard_lots",
    "orchard_arrays",
    "orchard_ground_truth",
    "orchard_true_coefficients",
]


def make_orchard_lots(n_lots=400, *, n_classes=2, flip_far=0.20, flip_near=0.10, random_state=0):
    """Simulate the orchard cooperative's intake log (invented data).

    See the module docstring for the scenario, the ground-truth table and the
    corruption rule.

    Parameters
    ----------
    n_lots : int, default=400
        Number of rows, at least 10 (an integral float such as ``1e6`` is
        accepted). Vectorised, so large frames for benchmarks are cheap to
        simulate (timings in benchmarks/README.md).
    n_classes : {2, 3}, default=2
        2: ``storage_grade`` in ``{"early_sale", "long_storage"}``;
        3: in ``{"fresh_market", "juice", "long_storage"}``.
    flip_far : float in [0, 1), default=0.20
        Share of the far half's labels that are flipped: exactly
        ``round(flip_far * (n_lots // 2))`` rows (40 at the defaults).
    flip_near : float in [0, 1), default=0.10
        Share of the near half's labels that are flipped: exactly
        ``round(flip_near * (n_lots - n_lots // 2))`` rows (20 at the
        defaults).
    random_state : int >= 0, numpy.random.Generator or None, default=0
        Seed; the same int gives an identical frame.

    Returns
    -------
    df : pandas.DataFrame of shape (n_lots, 10)
        Columns ``lot_id, orchard, firmness_n, soluble_solids_brix,
        starch_index, days_since_bloom, fruit_mass_g, bruise_share_pct,
        intake_temp_c, storage_grade``; text columns have pandas' default
        string dtype (``str`` on pandas 3, ``object`` on pandas 2), integer
        measurements are int64, the others float64. ``df.attrs`` holds the
        ground truth (plain python objects):

        - ``"scenario"``, ``"description"``: identification, and that the
          data are invented;
        - ``"target"``: ``"storage_grade"``; ``"id_column"``: ``"lot_id"``;
        - ``"classes"``: sorted class labels; ``"reference_class"``: the
          class whose linear predictor is fixed at 0;
        - ``"features"``: the seven measurements the truth uses, in order;
          ``"noise_features"``: those with zero true effect;
        - ``"feature_center"``, ``"feature_scale"``: ``{feature: float}``,
          the standardisation the truth is stated on;
        - ``"coef_standardised"``, ``"coef_original"``:
          ``{class: {feature: float}}`` (the reference class all zeros);
        - ``"intercept_standardised"``, ``"intercept_original"``:
          ``{class: float}``;
        - ``"corrupted"``: ``{"lot_id": [...], "kind": [...],
          "clean_label": [...]}``, one entry per flipped row, kind ``"far"``
          or ``"near"``;
        - ``"n_corrupted"``: ``{"far": int, "near": int}``;
        - ``"params"``: ``{"n_lots", "n_classes", "flip_far", "flip_near",
          "random_state"}`` (``random_state`` is None unless an int seed was
          given).

    See Also
    --------
    orchard_ground_truth : per-row truth as a DataFrame.
    orchard_true_coefficients : the true coefficients as a DataFrame.
    orchard_arrays : the same simulation as bare arrays, for benchmarks.

    Examples
    --------
    >>> from skbayeslogit.datasets import make_orchard_lots
    >>> df = make_orchard_lots(200, random_state=1)
    >>> df.shape
    (200, 10)
    >>> df.attrs["n_corrupted"]
    {'far': 20, 'near': 10}
    """
    n, n_classes, flip_far, flip_near = check_params(n_lots, n_classes, flip_far, flip_near)
    rng, seed = check_random_state(random_state)
    sim = simulate(n, n_classes, flip_far, flip_near, rng)
    truth = sim["truth"]
    classes = np.array(truth["classes"], dtype=object)
    M = sim["M"]
    lot_id = lot_ids(n)

    columns = {
        "lot_id": lot_id,
        "orchard": np.array(ORCHARDS, dtype=object)[sim["orchard"]],
    }
    for j, name in enumerate(FEATURES):
        is_count = name in ("starch_index", "days_since_bloom", "fruit_mass_g")
        columns[name] = M[j].astype(np.int64) if is_count else M[j]
    columns[TARGET] = classes[sim["y"]]
    df = pd.DataFrame(columns)

    far, near = sim["far"], sim["near"]
    flipped = np.concatenate([far, near])
    attrs = {
        "scenario": "orchard_lots",
        "description": (
            "Invented apple-lot intake log simulated from a known "
            f"{'logistic' if n_classes == 2 else 'softmax'} ground truth with "
            "deliberately corrupted labels; not real data."
        ),
        "target": TARGET,
        "id_column": "lot_id",
        **truth,
        "corrupted": {
            "lot_id": [lot_id[i] for i in flipped.tolist()],
            "kind": ["far"] * far.size + ["near"] * near.size,
            "clean_label": classes[sim["y_clean"][flipped]].tolist(),
        },
        "n_corrupted": {"far": int(far.size), "near": int(near.size)},
        "params": {
            "n_lots": n,
            "n_classes": n_classes,
            "flip_far": flip_far,
            "flip_near": flip_near,
            "random_state": seed,
        },
    }
    df.attrs.update(attrs)
    return df


def orchard_arrays(
    n_lots,
    *,
    n_classes=2,
    d_extra=0,
    flip_far=0.20,
    flip_near=0.10,
    standardise=True,
    random_state=0,
):
    """The orchard simulation as bare arrays, for benchmarks and solver tests.

    With ``d_extra=0`` and the same other arguments, ``X`` and ``y`` are
    exactly the measurements and labels of :func:`make_orchard_lots`
    (standardised or not), without building a DataFrame.

    Parameters
    ----------
    n_lots : int
        Number of rows, at least 10 (an integral float such as ``1e6`` is
        accepted).
    n_classes : {2, 3}, default=2
    d_extra : int >= 0, default=0
        Extra independent standard-normal columns with zero true effect,
        appended after the seven measurements (e.g. ``d_extra=13`` gives
        d = 20). They are drawn after everything else, so the first seven
        columns and ``y`` do not depend on ``d_extra``.
    flip_far, flip_near : float in [0, 1), default=0.20, 0.10
        As in :func:`make_orchard_lots`.
    standardise : bool, default=True
        Return the measurements on the standardised scale of the ground truth
        (``(x - center) / scale``, see ``FEATURES`` and the module docstring)
        instead of the original units.
    random_state : int >= 0, numpy.random.Generator or None, default=0

    Returns
    -------
    X : ndarray of shape (n_lots, 7 + d_extra), float64, C-contiguous
        Columns: ``FEATURES`` in order, then the extra noise columns.
    y : ndarray of shape (n_lots,), int64 in ``[0, n_classes)``
        Index into the sorted class labels (binary: 1 = ``long_storage``).
    """
    n, n_classes, flip_far, flip_near = check_params(n_lots, n_classes, flip_far, flip_near)
    if isinstance(d_extra, bool) or not isinstance(d_extra, numbers.Integral):
        raise TypeError(f"d_extra must be a non-negative int, got {d_extra!r}.")
    d_extra = operator.index(d_extra)
    if d_extra < 0:
        raise ValueError(f"d_extra must be non-negative, got {d_extra}.")
    rng, _ = check_random_state(random_state)
    sim = simulate(n, n_classes, flip_far, flip_near, rng)
    M = to_standard_scale(sim["M"], sim["truth"]) if standardise else sim["M"]
    X = np.empty((n, len(FEATURES) + d_extra))
    X[:, : len(FEATURES)] = M.T
    if d_extra:
        X[:, len(FEATURES) :] = rng.standard_normal((n, d_extra))
    return X, sim["y"].astype(np.int64)


def orchard_ground_truth(df):
    """Per-row ground truth of a frame made by :func:`make_orchard_lots`.

    Works on any row subset or reordering of such a frame, as long as
    ``df.attrs`` and the measurement columns survive: corrupted rows are
    matched by ``lot_id`` and the true probabilities are recomputed from the
    measurements.

    Parameters
    ----------
    df : pandas.DataFrame
        Output of :func:`make_orchard_lots` (or rows of it).

    Returns
    -------
    truth : pandas.DataFrame, indexed like ``df``
        Columns:

        - ``lot_id``;
        - ``observed_label``: the (possibly corrupted) ``storage_grade``;
        - ``clean_label``: the label drawn from the true model;
        - ``label_corrupted``: bool;
        - ``corruption``: ``"far"``, ``"near"`` or ``"none"``;
        - ``true_prob_<class>`` for every class: true P(class | x), in [0, 1];
        - ``true_prob_clean``: true probability of the clean label;
        - ``clean_margin``: linear predictor of the clean label minus the
          largest other one (log-odds; large positive = confidently correct);
        - ``boundary_gap``: gap between the two largest linear predictors,
          >= 0 (small = near the decision boundary);
        - binary only, ``true_logit``: true log-odds of ``long_storage``.
    """
    attrs = require_truth(df)
    classes = list(attrs["classes"])
    features = list(attrs["features"])
    M = np.array([df[f].to_numpy(dtype=np.float64) for f in features])
    eta = linear_predictor(to_standard_scale(M, attrs), attrs)
    prob = softmax(eta, axis=1)

    lot_id = df[attrs["id_column"]].astype(object).to_numpy()
    observed = df[attrs["target"]].astype(object).to_numpy()
    corrupted = attrs["corrupted"]
    kind_of = dict(zip(corrupted["lot_id"], corrupted["kind"], strict=True))
    clean_of = dict(zip(corrupted["lot_id"], corrupted["clean_label"], strict=True))
    kind = np.array([kind_of.get(i, "none") for i in lot_id], dtype=object)
    clean = np.array(
        [clean_of.get(i, o) for i, o in zip(lot_id, observed, strict=True)], dtype=object
    )
    code = {c: k for k, c in enumerate(classes)}
    y_clean = np.array([code[c] for c in clean], dtype=np.intp)
    margin, gap = margins(eta, y_clean)

    out = {
        "lot_id": lot_id,
        "observed_label": observed,
        "clean_label": clean,
        "label_corrupted": kind != "none",
        "corruption": kind,
    }
    for k, c in enumerate(classes):
        out[f"true_prob_{c}"] = prob[:, k]
    out["true_prob_clean"] = prob[np.arange(len(y_clean)), y_clean]
    out["clean_margin"] = margin
    out["boundary_gap"] = gap
    if len(classes) == 2:
        out["true_logit"] = eta[:, 1] - eta[:, 0]
    return pd.DataFrame(out, index=df.index)


def orchard_true_coefficients(df):
    """The true coefficients of a frame made by :func:`make_orchard_lots`.

    Parameters
    ----------
    df : pandas.DataFrame
        Output of :func:`make_orchard_lots`; only ``df.attrs`` is read.

    Returns
    -------
    coef : pandas.DataFrame
        One row per (class, parameter), the intercept first; columns
        ``class``, ``parameter`` (``"intercept"`` or a feature name),
        ``standardised`` (truth on ``(x - center) / scale``), ``original``
        (truth on the recorded units), ``center``, ``scale`` (NaN for the
        intercept). Binary: only the positive class ``long_storage``.
        Three classes: every class, the reference class ``juice`` all zeros.
        ``df.set_index("parameter")`` lines a binary table up with a fitted
        coefficient table.
    """
    attrs = require_truth(df)
    classes = list(attrs["classes"])
    if len(classes) == 2:
        classes = [c for c in classes if c != attrs["reference_class"]]
    rows = []
    for c in classes:
        rows.append(
            (
                c,
                "intercept",
                attrs["intercept_standardised"][c],
                attrs["intercept_original"][c],
                np.nan,
                np.nan,
            )
        )
        for f in attrs["features"]:
            rows.append(
                (
                    c,
                    f,
                    attrs["coef_standardised"][c][f],
                    attrs["coef_original"][c][f],
                    attrs["feature_center"][f],
                    attrs["feature_scale"][f],
                )
            )
    return pd.DataFrame(
        rows, columns=["class", "parameter", "standardised", "original", "center", "scale"]
    )
