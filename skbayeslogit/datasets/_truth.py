"""The orchard scenario's ground truth: columns, standardisation, true coefficients.

See the package docstring of :mod:`skbayeslogit.datasets` for the table.
"""

import numpy as np

#: Name of the label column.
TARGET = "storage_grade"

#: The seven measurements the ground truth uses, in column order.
FEATURES = (
    "firmness_n",
    "soluble_solids_brix",
    "starch_index",
    "days_since_bloom",
    "fruit_mass_g",
    "bruise_share_pct",
    "intake_temp_c",
)

#: Measurements with zero true effect.
NOISE_FEATURES = ("intake_temp_c",)

CENTER = (70.5, 13.0, 4.6, 145.5, 191.5, 3.0, 14.0)
SCALE = (7.8, 1.15, 1.7, 9.5, 26.7, 2.6, 3.5)

# Standardised-scale truth; the reference class (if any) has no entry.
TRUTH = {
    2: {
        "classes": ("early_sale", "long_storage"),
        "reference": "early_sale",
        "coef": {"long_storage": (1.2, 0.6, -0.9, -0.3, -0.4, -1.0, 0.0)},
        "intercept": {"long_storage": 0.3},
    },
    3: {
        "classes": ("fresh_market", "juice", "long_storage"),
        "reference": "juice",
        "coef": {
            "fresh_market": (0.7, 0.8, -0.2, 0.0, 0.3, -0.9, 0.0),
            "long_storage": (1.5, 0.5, -1.0, -0.3, -0.2, -1.6, 0.0),
        },
        "intercept": {"fresh_market": 0.3, "long_storage": -0.4},
    },
}


def truth_record(n_classes):
    """Plain-python description of the true model (goes into ``attrs``)."""
    spec = TRUTH[n_classes]
    coef_std, coef_orig, icpt_std, icpt_orig = {}, {}, {}, {}
    for cls in spec["classes"]:
        if cls == spec["reference"]:
            beta = (0.0,) * len(FEATURES)
            alpha = 0.0
        else:
            beta = spec["coef"][cls]
            alpha = spec["intercept"][cls]
        coef_std[cls] = {f: float(b) for f, b in zip(FEATURES, beta, strict=True)}
        coef_orig[cls] = {f: float(b / s) for f, b, s in zip(FEATURES, beta, SCALE, strict=True)}
        icpt_std[cls] = float(alpha)
        icpt_orig[cls] = float(
            alpha - sum(b * c / s for b, c, s in zip(beta, CENTER, SCALE, strict=True))
        )
    return {
        "classes": list(spec["classes"]),
        "reference_class": spec["reference"],
        "features": list(FEATURES),
        "noise_features": list(NOISE_FEATURES),
        "feature_center": {f: float(c) for f, c in zip(FEATURES, CENTER, strict=True)},
        "feature_scale": {f: float(s) for f, s in zip(FEATURES, SCALE, strict=True)},
        "coef_standardised": coef_std,
        "intercept_standardised": icpt_std,
        "coef_original": coef_orig,
        "intercept_original": icpt_orig,
    }


def to_standard_scale(M, truth):
    """``(x - center) / scale`` of feature-major ``M``, shape (d, n)."""
    center = np.array([truth["feature_center"][f] for f in truth["features"]])
    scale = np.array([truth["feature_scale"][f] for f in truth["features"]])
    Z = M - center[:, None]
    Z /= scale[:, None]
    return Z


def linear_predictor(Z, truth):
    """True linear predictor of every class, shape (n, K); reference column 0.

    ``Z`` is the standardised feature-major matrix, shape (d, n). Summed
    feature by feature rather than by a matrix product so that every row's
    value is independent of the others: the generator and
    :func:`orchard_ground_truth` (on any subset of rows) then agree bit for
    bit.
    """
    classes = truth["classes"]
    eta = np.zeros((Z.shape[1], len(classes)))
    for k, c in enumerate(classes):
        col = np.full(Z.shape[1], truth["intercept_standardised"][c])
        for j, f in enumerate(truth["features"]):
            beta = truth["coef_standardised"][c][f]
            if beta != 0.0:
                col += beta * Z[j]
        eta[:, k] = col
    return eta


def margins(eta, y):
    """Clean-label margin and gap between the two largest linear predictors.

    Parameters
    ----------
    eta : ndarray of shape (n, K)
    y : ndarray of shape (n,), int in ``[0, K)``

    Returns
    -------
    margin : ndarray of shape (n,)
        ``eta[y] - max_{k != y} eta[k]``; large and positive when the truth
        is confident in the clean label.
    gap : ndarray of shape (n,), >= 0
        Distance (in log-odds) to the nearest decision boundary.
    """
    rows = np.arange(eta.shape[0])
    own = eta[rows, y]
    others = eta.copy()
    others[rows, y] = -np.inf
    margin = own - others.max(axis=1)
    top2 = np.partition(eta, eta.shape[1] - 2, axis=1)[:, -2:]
    gap = top2[:, 1] - top2[:, 0]
    return margin, gap


def require_truth(df):
    attrs = getattr(df, "attrs", None)
    if not isinstance(attrs, dict) or attrs.get("scenario") != "orchard_lots":
        raise ValueError(
            "df carries no orchard ground truth in df.attrs; pass a frame made by "
            "make_orchard_lots (operations that drop attrs, such as some merges "
            "and concatenations, lose it)."
        )
    return attrs
