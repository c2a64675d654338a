"""What the accessor's figures show, computed from a model and a frame.

``plotting`` only draws; the numbers it draws come from here.
"""

import numpy as np
import pandas as pd

from .fitting import class_codes, fitted_on_frame
from .registry import is_fitted, model_label

# Warnings point at the user's call: this module -> accessor method -> user.
_CALLER = 3


def coefficient_view(model, level, include_intercept):
    """Estimates and bounds of a fitted model's coefficients, and the axis label."""
    if not is_fitted(model):
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
        table = table[table.index.get_level_values(-1) != "intercept"]
    # The linear predictor is log-odds for the logistic models and the
    # probit index for the probit model, so the label names neither.
    unit = "per standard deviation" if standardized else "per unit"
    return {
        "table": table,
        "level": float(level),
        "xlabel": f"coefficient (linear predictor {unit} of the feature)",
    }


def calibration_view(table, target):
    """Axis label, scores and title of the reliability diagram of a calibration table."""
    classes = table.attrs["classes"]
    if len(classes) == 2:
        xlabel = f"predicted probability of {classes[1]}"
    else:
        xlabel = "predicted probability of the class (each class vs the rest)"
    scores = {
        "ECE": table.attrs["ece"],
        "Brier": table.attrs["brier"],
        "log loss": table.attrs["log_loss"],
    }
    title = f"Calibration of {target} ({table.attrs['n']} rows)"
    return {"table": table, "xlabel": xlabel, "scores": scores, "title": title}


def _padded_range(values, size):
    lo, hi = float(np.min(values)), float(np.max(values))
    pad = 0.05 * (hi - lo) if hi > lo else 0.5
    return np.linspace(lo - pad, hi + pad, size)


def _check_axes(feats, x, y):
    for name, arg in ((x, "x"), (y, "y")):
        if name not in feats:
            raise KeyError(
                f"{arg}={name!r} is not a feature of the model; its features: {', '.join(feats)}."
            )
    if x == y:
        raise ValueError("x and y must be two different features.")


def _draw_lines(model, feats, x, y, means, n_draws, random_state):
    """Posterior draws as lines ``a x + b y + c = 0``, the other features at their means."""
    draws = np.asarray(model.sample_coef(n_draws, random_state=random_state))
    d = len(feats)
    ix, iy = feats.index(x), feats.index(y)
    others = [j for j in range(d) if j not in (ix, iy)]
    fixed = means.to_numpy()[others]
    intercept = draws[:, d] if draws.shape[1] > d else np.zeros(len(draws))
    c = intercept + draws[:, others] @ fixed
    return np.column_stack([draws[:, ix], draws[:, iy], c])


def boundary_view(df, model, x, y, target, *, n_draws, level, random_state, grid_size,
                  dropna):  # fmt: skip
    """Everything ``plotting.boundary_figure`` draws, as keyword arguments."""
    model, X, labels, keep = fitted_on_frame(df, model, target, dropna, stacklevel=_CALLER + 1)
    classes, _ = class_codes(model, labels, target)
    if len(classes) != 2:
        raise ValueError(
            f"plot_boundary draws a binary boundary; the model has {len(classes)} classes."
        )
    feats = list(X.columns)
    _check_axes(feats, x, y)
    xv, yv = X[x].to_numpy(), X[y].to_numpy()
    gx, gy = _padded_range(xv, grid_size), _padded_range(yv, grid_size)
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
        lines = _draw_lines(model, feats, x, y, means, n_draws, random_state)
    notes = ["other features held at their means"] if len(feats) > 2 else []
    if lines is None and band is None:
        notes.append(f"{model_label(model)} has no posterior: no draws or band")
    return {
        "x_name": x, "y_name": y, "x": xv, "y": yv, "labels": labels, "classes": classes,
        "grid_x": gx, "grid_y": gy, "grid_prob": prob, "draw_lines": lines, "band": band,
        "level": level, "note": "; ".join(notes) or None,
    }  # fmt: skip
