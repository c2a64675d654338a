"""What the accessor's figures show, computed from a model and a frame.

``plotting`` only draws; the numbers it draws come from here.
"""

import numpy as np
import pandas as pd

from .._checks.inputs import check_level
from .arguments import check_positive_int
from .fitting import class_codes, fitted_on_frame
from .formatting import significant
from .orientation import positive_index
from .registry import is_fitted, model_label

# Warnings point at the user's call: this module -> accessor method -> user.
_CALLER = 3


def coefficient_view(model, level, include_intercept):
    """Estimates and bounds of a fitted model's coefficients, and the axis label."""
    if not is_fitted(model):
        raise TypeError("plot_coefficients needs a fitted model.")
    table = model.coef_table(level) if hasattr(model, "coef_table") else None
    if table is None or "lower" not in table.columns:
        raise TypeError(
            f"{model_label(model)} has no posterior (no coef_table), so it has no "
            "credible intervals to plot; use the laplace or probit model."
        )
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


_ECE_NAMES = {"uniform": "ECE, equal-width", "quantile": "ECE, equal-count"}


def calibration_view(table, target):
    """Axis label, scores and title of the reliability diagram of a calibration table.

    A table with both binnings (``binning="both"``) gives one ECE each.
    """
    classes = table.attrs["classes"]
    if len(classes) == 2:
        xlabel = f"predicted probability of {table.attrs['positive_class']}"
    else:
        xlabel = "predicted probability of the class (each class vs the rest)"
    by_binning = table.attrs.get("ece_by_binning", {"uniform": table.attrs["ece"]})
    if len(by_binning) > 1:
        scores = {_ECE_NAMES.get(how, how): value for how, value in by_binning.items()}
    else:
        scores = {"ECE": table.attrs["ece"]}
    scores.update({"Brier": table.attrs["brier"], "log loss": table.attrs["log_loss"]})
    rows = f"{table.attrs['n']} rows"
    if table.attrs.get("weight_total", table.attrs["n"]) != table.attrs["n"]:
        rows += f", counted by weight: {significant(table.attrs['weight_total'])}"
    title = f"Calibration of {target} ({rows})"
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


def _draw_lines(model, x, y, held, n_draws, random_state):
    """Posterior draws as lines ``a x + b y + c = 0``, the other features held.

    ``held`` is the design row (the model's encoded columns) of the held
    values; the draws are over the same columns, then the intercept.
    """
    draws = np.asarray(model.sample_coef(n_draws, random_state=random_state))
    names = list(held.index)
    d = len(names)
    ix, iy = names.index(x), names.index(y)
    others = [j for j in range(d) if j not in (ix, iy)]
    fixed = held.to_numpy()[others]
    intercept = draws[:, d] if draws.shape[1] > d else np.zeros(len(draws))
    c = intercept + draws[:, others] @ fixed
    return np.column_stack([draws[:, ix], draws[:, iy], c])


def _held_values(X, feats):
    """One value per feature to hold it at: the mean, or the most frequent level."""
    return {
        f: X[f].mean() if pd.api.types.is_numeric_dtype(X[f].dtype) else X[f].mode().iloc[0]
        for f in feats
    }


def _design_row(model, held):
    """The held values as the model's design row (encoded by a FrameModel)."""
    row = pd.DataFrame({f: [v] for f, v in held.items()})
    if hasattr(model, "transform") and hasattr(model, "feature_names_out_"):
        return model.transform(row).iloc[0]
    return row.iloc[0].astype(np.float64)


def checked_boundary_options(options):
    """``plot_boundary``'s level, draw count and grid size, checked (one-line errors)."""
    return {
        **options,
        "level": check_level(options["level"]),
        "n_draws": check_positive_int("n_draws", options["n_draws"], minimum=0),
        "grid_size": check_positive_int("grid_size", options["grid_size"], minimum=10),
    }


def boundary_view(df, model, x, y, target, *, n_draws, level, random_state, grid_size,
                  dropna):  # fmt: skip
    """Everything ``plotting.boundary_figure`` draws, as keyword arguments.

    ``target`` None: the model's ``target_name_`` (set by ``fit``).
    """
    if target is None:
        target = getattr(model, "target_name_", None)
        if target is None:
            raise ValueError(
                "pass target=: the model does not record its target column "
                "(models from df.bayeslogit.fit do)."
            )
    model, X, labels, keep = fitted_on_frame(df, model, target, dropna, stacklevel=_CALLER + 1)
    classes, _ = class_codes(model, labels, target)
    if len(classes) != 2:
        raise ValueError(
            f"plot_boundary draws a binary boundary; the model has {len(classes)} classes."
        )
    index = positive_index(model, 2)
    feats = [str(f) for f in model.feature_names_in_]
    _check_axes(feats, x, y)
    xv, yv = X[x].to_numpy(), X[y].to_numpy()
    gx, gy = _padded_range(xv, grid_size), _padded_range(yv, grid_size)
    GX, GY = np.meshgrid(gx, gy)
    held = _held_values(X, feats)
    # One row of held values repeated keeps each column's dtype.
    grid = pd.DataFrame([held]).iloc[np.zeros(GX.size, dtype=np.intp)].reset_index(drop=True)
    grid[x] = GX.ravel()
    grid[y] = GY.ravel()
    prob = np.asarray(model.predict_proba(grid))[:, index].reshape(GX.shape)
    band = None
    if hasattr(model, "predict_interval"):
        lo, hi = model.predict_interval(grid, level=level)
        band = ((np.asarray(lo) < 0.5) & (np.asarray(hi) > 0.5)).reshape(GX.shape)
    lines = None
    if n_draws and hasattr(model, "sample_coef"):
        lines = _draw_lines(model, x, y, _design_row(model, held), n_draws, random_state)
    notes = (
        ["other features held at their means (levels: the most frequent)"]
        if len(feats) > 2
        else []
    )
    if lines is None and band is None:
        notes.append(f"{model_label(model)} has no posterior: no draws or band")
    return {
        "x_name": x, "y_name": y, "x": xv, "y": yv, "labels": labels,
        "classes": classes[[1 - index, index]],
        "grid_x": gx, "grid_y": gy, "grid_prob": prob, "draw_lines": lines, "band": band,
        "level": level, "note": "; ".join(notes) or None,
    }  # fmt: skip
