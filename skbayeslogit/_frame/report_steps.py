"""The report's steps after the column roles: fits, held-out probabilities, row tables.

``skbayeslogit.report.build_report`` calls these in order; each returns
plain tables (or a small record) that the :class:`~skbayeslogit.report.Report`
holds.
"""

import time
from dataclasses import dataclass, field

import numpy as np
import pandas as pd

from .._fit.identification import binary_separation
from .approximation import approximation_check, approximation_verdict
from .arguments import check_positive_int
from .comparison import compare_models
from .doubtful import doubtful_table, precision_at
from .evaluation import argmax_confusion, calibration_table, class_rates
from .fitting import class_codes, coefficient_table
from .model import labels_of
from .registry import available_models

# The evidence search spans 1e-4 to 1e4 times 1 / (median column sd)
# (``_fit.evidence.maximise_evidence``); the report's columns are standardised,
# so it spans 1e-4 to 1e4. A chosen scale within a factor of two of an end is
# at the edge: the refinement can stop just inside the top without a warning,
# and the bottom is never warned about.
SEARCH_BOTTOM, SEARCH_TOP = 1e-4, 1e4
EDGE_FACTOR = 2.0

# The separation check solves a linear program over every row; above this
# many cells (rows x columns) it is left out, with a note.
SEPARATION_MAX_CELLS = 2_000_000


@dataclass
class Fits:
    """Every model fitted on all used rows, and what the fits warned about."""

    models: dict
    coefficients: dict
    calibration: dict
    evidence: pd.DataFrame
    separated_classes: list = field(default_factory=list)  # classes a hyperplane separates
    at_edge: list = field(default_factory=list)  # models at the largest scale searched
    at_floor: list = field(default_factory=list)  # models at the smallest


def held_out_comparison(df, target, seeded, cv, random_state, fit_options):
    """The cross-validated comparison and each model's out-of-fold probabilities.

    Returns
    -------
    comparison : pandas.DataFrame
        As ``df.bayeslogit.compare``.
    held_out : dict of str to ndarray of shape (n, K)
    """
    cv = check_positive_int("cv", cv, minimum=2)
    held_out = {}
    comparison = compare_models(
        df, target, seeded, cv, available=available_models(), random_state=random_state,
        standardize=True, options={"dropna": False, **fit_options}, held_out=held_out,
    )  # fmt: skip
    return comparison, held_out


def fit_models(df, target, fit_options, chosen, level, seed_params, progress):
    """Each model fitted on all rows; a prior scale at the edge of its search noted.

    The estimator warns of separation only without a prior, which the
    report never fits (``separated_classes`` checks the data instead), and
    of the edge only when its search stops exactly on it, so the edge is
    read from the chosen scale (``SEARCH_TOP``). The fits' warnings reach
    the caller untouched.
    """
    acc = df.bayeslogit
    fits = Fits({}, {}, {}, pd.DataFrame())
    evidence_rows = []
    for name in chosen:
        if progress is not None:
            progress(f"fitting {name} on all {len(df)} rows...")
        started = time.perf_counter()
        model = acc.fit(target, model=name, **fit_options, **seed_params(name))
        seconds = time.perf_counter() - started
        scale = getattr(getattr(model, "estimator_", model), "prior_scale_", None)
        if scale is not None and scale * EDGE_FACTOR >= SEARCH_TOP:
            fits.at_edge.append(name)
        elif scale is not None and scale <= SEARCH_BOTTOM * EDGE_FACTOR:
            fits.at_floor.append(name)
        fits.models[name] = model
        fits.coefficients[name] = coefficient_table(model, level)
        fits.calibration[name] = calibration_table(df, target, model, 10, False, binning="both")
        inner = getattr(model, "estimator_", model)
        evidence_rows.append(
            {
                "model": name,
                "prior_scale": getattr(inner, "prior_scale_", getattr(inner, "prior_scale", None)),
                "log_evidence": getattr(inner, "log_evidence_", None),
                "fit_seconds": seconds,
            }
        )
    fits.evidence = pd.DataFrame(evidence_rows).set_index("model")
    return fits


def separated_classes(df, target, model, weight, notes):
    """The classes that a hyperplane separates from the others on the encoded columns.

    Binary: the positive class when the two are (quasi-)completely
    separated, by the linear program of Konis (2007) in
    ``_fit.identification.binary_separation``. Multiclass: each class
    separated from all the others, a sufficient condition for the
    maximum-likelihood estimate not to exist (Albert & Anderson, Biometrika
    71, 1984); a separation between two classes only is not looked for.

    Returns
    -------
    list of str
    """
    X = model.transform(df).to_numpy()
    if X.size > SEPARATION_MAX_CELLS:
        notes.append(f"the separation check was left out ({X.shape[0]} rows are too many).")
        return []
    _, classes, codes = probabilities(df, target, model)
    w = np.ones(len(X)) if weight is None else df[weight].to_numpy(dtype=np.float64)
    shown = [1] if len(classes) == 2 else range(len(classes))
    return [
        str(classes[k])
        for k in shown
        if binary_separation(X, (codes == k).astype(np.float64), w, True)
    ]


def checked_approximation(df, target, model, random_state, notes):
    """The primary model's approximation check, or None (a model without one, or a failure)."""
    if not hasattr(getattr(model, "estimator_", model), "check_approximation"):
        return None
    try:
        return approximation_check(df, target, model, False, {"random_state": random_state})
    except (TypeError, ValueError, ArithmeticError, np.linalg.LinAlgError) as exc:
        notes.append(f"the approximation check could not run: {exc}")
        return None


def checked_verdict(check, model, level):
    """The Report's ``approximation_verdict`` and ``corrected_coefficients``."""
    if check is None:
        return {"approximation_verdict": None, "corrected_coefficients": None}
    sentence, table = approximation_verdict(check, model, level)
    return {"approximation_verdict": sentence, "corrected_coefficients": table}


def row_weights(df, weight):
    """The weight column as float64, or None."""
    return None if weight is None else df[weight].to_numpy(dtype=np.float64)


def probabilities(df, target, model):
    """The model's probabilities on ``df``, its classes and each recorded label's index."""
    classes, codes = class_codes(model, labels_of(df[target]), target)
    return np.asarray(model.predict_proba(df)), classes, codes


def confusion_tables(df, target, model, weight):
    """Binary: the threshold table; multiclass: the K x K argmax table and per-class rates."""
    P, classes, codes = probabilities(df, target, model)
    if len(classes) == 2:
        return df.bayeslogit.confusion(target, model), None
    table = argmax_confusion(P, codes, classes, row_weights(df, weight))
    return table, class_rates(table)


def doubtful_rows(df, target, model, ids, lines, weight):
    """The complete doubtful list of ``model`` on the used rows."""
    P, classes, codes = probabilities(df, target, model)
    return doubtful_table(
        df, P, codes, classes, target, lines=lines, ids=ids, weights=row_weights(df, weight)
    )


def ground_truth(attrs, doubtful, top):
    """For the demo data (its frame's ``attrs``): how many listed rows were
    deliberately mislabelled, or None."""
    if not (attrs.get("scenario") and "corrupted" in attrs):
        return None
    flipped = set(attrs["corrupted"]["lot_id"])
    id_col = attrs.get("id_column", "lot_id")
    if id_col not in doubtful:
        return {"flipped": len(flipped), "top_hits": None, "listed_hits": None}
    ids = doubtful[id_col].tolist()
    shown = min(top, len(ids))
    return {
        "flipped": len(flipped),
        "top": shown,
        "top_hits": int(round(precision_at(ids, flipped, shown) * shown)) if shown else 0,
        "listed": len(ids),
        "listed_hits": sum(1 for i in ids if i in flipped),
    }
