"""The whole job on one table: the computations behind ``skbayeslogit report``.

:func:`build_report` runs, on a DataFrame with a label column, everything a
practitioner hands over: a cross-validated comparison of the models, the
coefficient tables with credible intervals (features standardised, so that
one prior scale fits all; both scales reported), the prior scale chosen by
the Laplace evidence, the rows with doubtful labels, the calibration, the
cost-minimising threshold, and predictive probabilities with intervals for a
few cases. :func:`render_text` prints it; :func:`write_outputs` writes CSV
tables, PNG figures, the fitted models and one self-contained HTML page.

Everything it reports is a statistical screening aid. Where a decision
affects people, the report says so, and it does not replace domain review.
"""

import base64
import html
import io
import time
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np
import pandas as pd
from sklearn.utils.multiclass import type_of_target

from . import accessor  # noqa: F401  (registers df.bayeslogit)
from .accessor import MODEL_NAMES, available_models

CAUTION = (
    "Caution: these probabilities, intervals and label checks are a statistical "
    "screening aid. Where a decision affects people (medical, credit, safety), they "
    "do not replace review by someone who knows the domain."
)

MODEL_TITLES = {
    "laplace": "Bayesian logistic (Laplace)",
    "probit": "Bayesian probit (Laplace)",
    "tempered": "Bi-tempered logistic (robust)",
}


@dataclass
class Report:
    """Everything ``build_report`` computed; tables are pandas DataFrames."""

    source: str
    target: str
    features: list
    classes: list
    level: float
    models: dict
    comparison: pd.DataFrame
    coefficients: dict
    evidence: pd.DataFrame
    calibration: dict
    confusion: pd.DataFrame
    doubtful: pd.DataFrame
    threshold: pd.DataFrame | None
    predictions: pd.DataFrame
    primary: str
    notes: list = field(default_factory=list)
    cost: tuple | None = None
    ground_truth: dict | None = None
    frame: pd.DataFrame | None = None  # the rows used (after --dropna)


def _progress(callback, message):
    if callback is not None:
        callback(message)


def _coefficients(model, level):
    """Coefficient table on both scales; estimates only for the tempered model."""
    if hasattr(model, "coef_table"):
        return model.coef_table(level)
    inner = getattr(model, "estimator_", model)
    names = list(model.feature_names_in_)
    classes = [str(c) for c in model.classes_]
    coef_std = np.atleast_2d(inner.coef_)
    coef_orig = np.atleast_2d(model.coef_)
    int_std = np.atleast_1d(inner.intercept_)
    int_orig = np.atleast_1d(model.intercept_)
    rows = []
    for k in range(coef_std.shape[0]):
        label = classes[1] if coef_std.shape[0] == 1 else classes[k]
        for j, name in enumerate(names):
            rows.append((label, name, coef_std[k, j], coef_orig[k, j]))
        rows.append((label, "intercept", int_std[k], int_orig[k]))
    table = pd.DataFrame(rows, columns=["class", "parameter", "estimate", "estimate_original"])
    if coef_std.shape[0] == 1:
        return table.drop(columns="class").set_index("parameter")
    return table.set_index(["class", "parameter"])


def build_report(
    df,
    target,
    *,
    features=None,
    models=("laplace", "probit", "tempered"),
    level=0.9,
    cost_fp=None,
    cost_fn=None,
    cv=5,
    random_state=0,
    n_cases=5,
    top_doubtful=10,
    source="data",
    dropna=False,
    progress=None,
):
    """Run the report's computations on ``df``.

    Parameters
    ----------
    df : pandas.DataFrame
        One row per case; never modified.
    target : str
        The label column.
    features : list of str, optional
        Default: every numeric column but the target.
    models : sequence of {"laplace", "probit", "tempered"}
        The first available one is the primary model (thresholds, cases).
        "probit" is skipped for a multiclass target, with a note.
    level : float in (0, 1)
        Credible level of every interval.
    cost_fp, cost_fn : float > 0, optional
        Costs of a false positive and a false negative; both or neither.
    cv : int >= 2
        Cross-validation folds of the comparison.
    random_state : int
        Seeds the folds.
    n_cases : int
        How many rows to show predictions for.
    top_doubtful : int
        How many doubtful labels to list.
    source : str
        How to describe the data in the output.
    dropna : bool
        Leave out rows with a missing value in the target or a used
        feature (the report notes how many) instead of raising.
    progress : callable(str), optional
        Receives progress messages.

    Returns
    -------
    Report
    """
    if (cost_fp is None) != (cost_fn is None):
        raise ValueError("give both --cost-fp and --cost-fn, or neither.")
    feats = df.bayeslogit._resolve_features(target, features)
    notes = []
    used = [*feats, target]
    missing = df[used].isna().sum()
    missing = missing[missing > 0]
    if len(missing):
        rows = int(df[used].isna().any(axis=1).sum())
        if not dropna:
            counts = ", ".join(f"{c} ({n})" for c, n in missing.items())
            raise ValueError(
                f"{rows} of {len(df)} rows have missing values, by column: {counts}. Drop or "
                "impute them, or pass --dropna to leave those rows out."
            )
        df = df.dropna(subset=used)
        notes.append(f"{rows} row(s) with missing values were left out (--dropna).")
    acc = df.bayeslogit
    labels = df[target].dropna().unique()
    n_classes = len(labels)
    if type_of_target(np.asarray(labels)) == "continuous":
        # Otherwise the first complaint is about too few rows per "class" in
        # the folds, which hides the real problem.
        raise ValueError(
            f"the target {target!r} holds non-integer numbers ({n_classes} distinct values); "
            "a classifier needs class labels. Bin or threshold it first."
        )
    chosen = []
    for name in models:
        if name not in MODEL_NAMES:
            raise ValueError(f"unknown model {name!r}; choose from {', '.join(MODEL_NAMES)}.")
        if name not in available_models():
            notes.append(f"model {name!r} is not available in this installation; skipped.")
            continue
        if name == "probit" and n_classes > 2:
            notes.append("probit is binary only; skipped for this multiclass target.")
            continue
        chosen.append(name)
    if not chosen:
        raise ValueError("none of the requested models can be fitted to this target.")
    primary = chosen[0]

    _progress(progress, f"cross-validating {', '.join(chosen)} ({cv} folds)...")
    comparison = acc.compare(target, feats, models=chosen, cv=cv, random_state=random_state)

    fitted, coefficients, calibration = {}, {}, {}
    evidence_rows = []
    for name in chosen:
        _progress(progress, f"fitting {name} on all {len(df)} rows...")
        started = time.perf_counter()
        model = acc.fit(target, feats, model=name)
        fitted[name] = model
        coefficients[name] = _coefficients(model, level)
        calibration[name] = acc.calibration(target, model)
        inner = getattr(model, "estimator_", model)
        evidence_rows.append(
            {
                "model": name,
                "prior_scale": getattr(inner, "prior_scale_", getattr(inner, "prior_scale", None)),
                "log_evidence": getattr(inner, "log_evidence_", None),
                "fit_seconds": time.perf_counter() - started,
            }
        )
    evidence = pd.DataFrame(evidence_rows).set_index("model")

    primary_model = fitted[primary]
    confusion = acc.confusion(target, primary_model)
    robust = "tempered" if "tempered" in fitted else primary
    _progress(progress, f"ranking doubtful labels with the {robust} model...")
    doubtful = acc.doubtful_labels(target, fitted[robust], top=top_doubtful)
    threshold = None
    if cost_fp is not None:
        if n_classes == 2:
            threshold = acc.cost_threshold(target, primary_model, cost_fp, cost_fn)
        else:
            notes.append("cost thresholds apply to binary targets only; skipped.")
    cases = df.head(n_cases)
    predictions = cases.bayeslogit.predict_table(primary_model, level=level)
    id_cols = [c for c in cases.columns if c not in feats and c != target][:1]
    predictions = predictions[
        id_cols + [target] + [c for c in predictions.columns if c not in df.columns]
    ]
    ground_truth = None
    if df.attrs.get("scenario") and "corrupted" in df.attrs:
        flipped = set(df.attrs["corrupted"]["lot_id"])
        id_col = df.attrs.get("id_column", "lot_id")
        hits = int(doubtful[id_col].isin(flipped).sum()) if id_col in doubtful else None
        ground_truth = {"flipped": len(flipped), "doubtful_hits": hits, "listed": len(doubtful)}
    return Report(
        source=source,
        target=target,
        features=feats,
        classes=[str(c) for c in primary_model.classes_],
        level=level,
        models=fitted,
        comparison=comparison,
        coefficients=coefficients,
        evidence=evidence,
        calibration=calibration,
        confusion=confusion,
        doubtful=doubtful,
        threshold=threshold,
        predictions=predictions,
        primary=primary,
        notes=notes,
        cost=None if cost_fp is None else (float(cost_fp), float(cost_fn)),
        ground_truth=ground_truth,
        frame=df,
    )


# -- text ---------------------------------------------------------------------


def _fmt(frame, digits=3):
    return frame.to_string(float_format=lambda v: f"{v:.{digits}f}", na_rep="-")


def _section(title):
    return f"\n{title}\n{'-' * len(title)}"


def _coef_columns(table, level):
    pct = f"{round(level * 100):d}%"
    keep = [c for c in ("estimate", "sd", "lower", "upper", "sign_prob") if c in table.columns]
    out = table[keep].copy()
    if "estimate_original" in table.columns:
        out["estimate_per_unit"] = table["estimate_original"]
    return out.rename(columns={"lower": f"lower_{pct}", "upper": f"upper_{pct}"})


def render_text(report):
    """The concise, aligned terminal summary of a :class:`Report`."""
    pct = f"{round(report.level * 100):d}%"
    lines = [
        f"skbayeslogit report: {report.source}",
        f"target {report.target!r} (classes: {', '.join(report.classes)}); "
        f"{len(report.features)} features: {', '.join(report.features)}",
        CAUTION,
    ]
    for note in report.notes:
        lines.append(f"note: {note}")

    lines.append(_section("Model comparison (cross-validated, held-out folds)"))
    cols = [
        c for c in ("accuracy", "log_loss", "brier", "ece", "fit_time") if c in report.comparison
    ]
    lines.append(_fmt(report.comparison[cols]))

    for name, table in report.coefficients.items():
        title = MODEL_TITLES.get(name, name)
        lines.append(_section(f"{title}: coefficients, features standardised ({pct} intervals)"))
        ev = report.evidence.loc[name]
        if ev["log_evidence"] is not None and pd.notna(ev["log_evidence"]):
            lines.append(
                f"prior scale chosen by the Laplace evidence: {ev['prior_scale']:.3g} "
                f"(log evidence {ev['log_evidence']:.2f})"
            )
        lines.append(_fmt(_coef_columns(table, report.level)))
        if "sign_prob" in table.columns:
            lines.append(
                "sign_prob: posterior probability that the coefficient has the sign of its "
                "estimate (not a p-value); estimate_per_unit: per recorded unit."
            )

    name = report.primary
    cal = report.calibration[name]
    lines.append(_section(f"Calibration of {name} on the fitted rows"))
    lines.append(
        f"expected calibration error {cal.attrs['ece']:.3f}, Brier {cal.attrs['brier']:.3f}, "
        f"log loss {cal.attrs['log_loss']:.3f} (in-sample; see the comparison for held-out)"
    )
    lines.append(_section(f"Confusion of {name} at threshold 0.5 (fitted rows)"))
    lines.append(_fmt(report.confusion))
    if report.threshold is not None:
        c_fp, c_fn = report.cost
        lines.append(
            _section(
                f"Threshold minimising cost (false positive {c_fp:g}, false negative {c_fn:g})"
            )
        )
        lines.append(_fmt(report.threshold))

    lines.append(_section("Rows whose labels look doubtful (a prompt to re-check, not a verdict)"))
    shown = report.doubtful
    keep = [c for c in shown.columns if c not in report.features and c != "orchard"]
    lines.append(_fmt(shown[keep]))
    if report.ground_truth is not None:
        gt = report.ground_truth
        lines.append(
            f"demo ground truth: {gt['doubtful_hits']} of these {gt['listed']} rows were "
            f"deliberately mislabelled ({gt['flipped']} of all rows were)."
        )

    lines.append(_section(f"Predictive probabilities with {pct} credible bounds ({name})"))
    lines.append(_fmt(report.predictions))
    return "\n".join(lines) + "\n"


# -- files --------------------------------------------------------------------


def _figures(report, df):
    """Figures for the HTML page and PNG files; empty without matplotlib."""
    try:
        from .plotting import require_matplotlib

        require_matplotlib()
    except ImportError:
        return {}
    figs = {}
    acc = df.bayeslogit
    for name, model in report.models.items():
        if hasattr(model, "coef_table"):
            figs[f"coefficients_{name}"] = acc.plot_coefficients(model, level=report.level)
    figs[f"calibration_{report.primary}"] = acc.plot_calibration(
        report.target, report.models[report.primary]
    )
    primary = report.models[report.primary]
    table = report.coefficients[report.primary]
    if len(report.classes) == 2 and len(report.features) >= 2 and "sign_prob" in table:
        slopes = table.drop(index="intercept", errors="ignore")
        top = list(slopes["estimate"].abs().sort_values(ascending=False).index[:2])
        try:
            figs["boundary"] = acc.plot_boundary(primary, top[0], top[1])
        except (TypeError, ValueError):
            pass
    return figs


def _png(fig):
    buf = io.BytesIO()
    fig.savefig(buf, format="png", dpi=110, bbox_inches="tight")
    return buf.getvalue()


def write_outputs(report, df, out_dir):
    """Write CSV tables, PNG figures, the fitted models and report.html.

    Returns
    -------
    dict
        Paths written, by kind.
    """
    import joblib

    from . import __version__

    out = Path(out_dir)
    out.mkdir(parents=True, exist_ok=True)
    written = {"csv": [], "png": [], "model": [], "html": []}

    def csv(name, frame):
        path = out / f"{name}.csv"
        frame.to_csv(path)
        written["csv"].append(path)

    csv("comparison", report.comparison)
    csv("evidence", report.evidence)
    for name, table in report.coefficients.items():
        csv(f"coefficients_{name}", table)
    for name, table in report.calibration.items():
        csv(f"calibration_{name}", table)
    csv("confusion", report.confusion)
    csv("doubtful_labels", report.doubtful)
    if report.threshold is not None:
        csv("cost_threshold", report.threshold)
    csv("predictions", report.predictions)

    for name, model in report.models.items():
        path = out / f"model_{name}.joblib"
        joblib.dump(
            {
                "model": model,
                "target": report.target,
                "features": list(report.features),
                "classes": list(report.classes),
                "model_name": name,
                "skbayeslogit_version": __version__,
            },
            path,
        )
        written["model"].append(path)

    images = {}
    used = report.frame if report.frame is not None else df
    for name, fig in _figures(report, used).items():
        data = _png(fig)
        path = out / f"{name}.png"
        path.write_bytes(data)
        written["png"].append(path)
        images[name] = base64.b64encode(data).decode("ascii")

    page = out / "report.html"
    page.write_text(_html(report, images), encoding="utf-8")
    written["html"].append(page)
    return written


def _table_html(frame, digits=3):
    return frame.to_html(float_format=lambda v: f"{v:.{digits}f}", na_rep="-", border=0)


def _html(report, images):
    pct = f"{round(report.level * 100):d}%"
    esc = html.escape
    parts = [
        "<!DOCTYPE html><html lang='en'><head><meta charset='utf-8'>",
        f"<title>skbayeslogit report: {esc(report.source)}</title>",
        "<style>body{font-family:sans-serif;max-width:70em;margin:2em auto;color:#222}"
        "table{border-collapse:collapse;margin:0.5em 0 1.5em}"
        "td,th{padding:0.2em 0.7em;text-align:right;border-bottom:1px solid #ddd}"
        "th{background:#f3f3f3}.caution{border:2px solid #444;padding:0.8em;background:#fafafa}"
        "img{max-width:100%;margin:0.5em 0}</style></head><body>",
        f"<h1>skbayeslogit report</h1><p>{esc(report.source)}; target "
        f"<code>{esc(report.target)}</code>, classes {esc(', '.join(report.classes))}; "
        f"features {esc(', '.join(report.features))}.</p>",
        f"<p class='caution'>{esc(CAUTION)}</p>",
    ]
    for note in report.notes:
        parts.append(f"<p><em>Note: {esc(note)}</em></p>")
    parts.append("<h2>Model comparison (cross-validated)</h2>")
    parts.append(_table_html(report.comparison))
    parts.append("<h2>Prior scale and evidence</h2>")
    parts.append(_table_html(report.evidence))
    for name, table in report.coefficients.items():
        parts.append(f"<h2>{esc(MODEL_TITLES.get(name, name))}: coefficients ({pct})</h2>")
        parts.append(_table_html(table))
        key = f"coefficients_{name}"
        if key in images:
            parts.append(f"<img alt='{key}' src='data:image/png;base64,{images[key]}'>")
    parts.append(f"<h2>Calibration ({esc(report.primary)})</h2>")
    parts.append(_table_html(report.calibration[report.primary]))
    for key in (f"calibration_{report.primary}", "boundary"):
        if key in images:
            parts.append(f"<img alt='{key}' src='data:image/png;base64,{images[key]}'>")
    parts.append("<h2>Confusion at threshold 0.5</h2>")
    parts.append(_table_html(report.confusion))
    if report.threshold is not None:
        parts.append("<h2>Cost-minimising threshold</h2>")
        parts.append(_table_html(report.threshold))
    parts.append(
        "<h2>Doubtful labels</h2><p>A prompt to re-check these records, not a verdict.</p>"
    )
    parts.append(_table_html(report.doubtful))
    parts.append(f"<h2>Predictions with {pct} credible bounds</h2>")
    parts.append(_table_html(report.predictions))
    parts.append("</body></html>")
    return "\n".join(parts)
