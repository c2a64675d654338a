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

import time
from dataclasses import dataclass, field

import numpy as np
import pandas as pd
from sklearn.utils.multiclass import type_of_target

from . import accessor  # noqa: F401  (registers df.bayeslogit)
from ._frame.fitting import coefficient_table
from ._frame.registry import MODELS, available_models, binary_only, make_model, model_title
from ._frame.report_columns import choose_columns, columns_text, evidence_by_model, used_rows
from ._frame.report_files import write_files
from ._frame.rows import missing_policy
from ._output.run_folder import RunFolder, sha256_bytes

CAUTION = (
    "Caution: these probabilities, intervals and label checks are a statistical "
    "screening aid. Where a decision affects people (medical, credit, safety), they "
    "do not replace review by someone who knows the domain."
)


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
    columns: pd.DataFrame | None = None  # columns.csv: every column's role and reason
    column_evidence: dict = field(default_factory=dict)
    reading: list = field(default_factory=list)  # how the file was read


def _progress(callback, message):
    if callback is not None:
        callback(message)


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
    **columns,
):
    """Run the report's computations on ``df``.

    Parameters
    ----------
    df : pandas.DataFrame
        One row per case; never modified.
    target : str
        The label column.
    features : list of str, optional
        Default: every column the role rules make a feature (numeric and
        categorical; not IDs, constants or free text).
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
        Seeds every random draw: the folds, and the ``random_state`` of each
        model that takes one (its posterior draws, hence the multiclass
        credible bounds).
    n_cases : int
        How many rows to show predictions for.
    top_doubtful : int
        How many doubtful labels to list.
    source : str
        How to describe the data in the output.
    dropna : bool
        The same as ``missing="drop"``.
    progress : callable(str), optional
        Receives progress messages.
    **columns
        ``id``, ``exclude`` (lists), ``weight``, ``positive``,
        ``max_levels``, ``missing`` ({"error", "drop", "impute"}: a missing
        cell in the target or a feature raises, its row is left out and
        noted, or features are imputed) as in ``df.bayeslogit.fit``;
        ``reading``, the :class:`~skbayeslogit._frame.reading.ReadResult`
        of the file.

    Returns
    -------
    Report
    """
    if (cost_fp is None) != (cost_fn is None):
        raise ValueError("give both --cost-fp and --cost-fn, or neither.")
    notes = []
    reading = columns.pop("reading", None)
    columns["missing"] = missing_policy(columns.get("missing"), dropna)
    choice = choose_columns(df, target, {**columns, "features": features}, reading)
    df = used_rows(df, target, choice.features, columns["missing"], notes)
    feats, fit_options = choice.features, choice.fit_options
    n_classes = _count_classes(df, target)
    chosen = _chosen_models(models, n_classes, target, notes)
    primary = chosen[0]
    acc = df.bayeslogit
    _progress(progress, f"cross-validating {', '.join(chosen)} ({cv} folds)...")
    seeded = {name: make_model(name, **_seed_params(name, random_state)) for name in chosen}
    comparison = acc.compare(
        target, models=seeded, cv=cv, random_state=random_state, **fit_options
    )
    fitted, coefficients, calibration, evidence = _fit_models(
        df, target, fit_options, chosen, level, progress, random_state
    )
    primary_model = fitted[primary]
    robust = "tempered" if "tempered" in fitted else primary
    _progress(progress, f"ranking doubtful labels with the {robust} model...")
    doubtful = acc.doubtful_labels(target, fitted[robust], top=top_doubtful)
    threshold = None
    if cost_fp is not None:
        if n_classes == 2:
            threshold = acc.cost_threshold(target, primary_model, cost_fp, cost_fn)
        else:
            notes.append("cost thresholds apply to binary targets only; skipped.")
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
        confusion=acc.confusion(target, primary_model),
        doubtful=doubtful,
        threshold=threshold,
        predictions=_predictions(df, primary_model, target, choice.ids, n_cases, level),
        primary=primary,
        notes=choice.statements + notes,
        cost=None if cost_fp is None else (float(cost_fp), float(cost_fn)),
        ground_truth=_ground_truth(df, doubtful),
        frame=df,
        columns=choice.table,
        column_evidence=evidence_by_model(fitted),
        reading=[] if reading is None else reading.summary_lines(),
    )


def _count_classes(df, target):
    labels = df[target].dropna().unique()
    if type_of_target(np.asarray(labels)) == "continuous":
        # Otherwise the first complaint is about too few rows per "class" in
        # the folds, which hides the real problem.
        raise ValueError(
            f"the target {target!r} holds non-integer numbers ({len(labels)} distinct values); "
            "a classifier needs class labels. Bin or threshold it first."
        )
    return len(labels)


def _chosen_models(models, n_classes, target, notes):
    """The requested models that can run here, in order; the others are noted."""
    models = [] if models is None else list(models)
    if not models:
        raise ValueError(f"no model requested; choose one or more of {', '.join(MODELS)}.")
    chosen, skipped = [], []
    available = available_models()
    for name in models:
        if name not in MODELS:
            raise ValueError(f"unknown model {name!r}; choose from {', '.join(MODELS)}.")
        if name not in available:
            skipped.append(f"model {name!r} is not available in this installation")
        elif n_classes > 2 and binary_only(name):
            skipped.append(
                f"{name} is binary-only and the target {target!r} has {n_classes} classes"
            )
        else:
            chosen.append(name)
    notes += [f"{why}; skipped." for why in skipped]
    if not chosen:
        others = [m for m in available if m not in models and not binary_only(m)]
        hint = f"; try --models {','.join(others)}" if n_classes > 2 and others else ""
        reasons = "; ".join(skipped)
        raise ValueError(f"none of the requested models can be fitted: {reasons}{hint}.")
    return chosen


def _seed_params(name, random_state):
    """``random_state`` for the models that draw at random, nothing for the others."""
    takes_seed = "random_state" in make_model(name).get_params()
    return {"random_state": random_state} if takes_seed else {}


def _fit_models(df, target, fit_options, chosen, level, progress, random_state):
    """Each model fitted on all rows: models, coefficients, calibration, evidence."""
    acc = df.bayeslogit
    fitted, coefficients, calibration = {}, {}, {}
    evidence_rows = []
    for name in chosen:
        _progress(progress, f"fitting {name} on all {len(df)} rows...")
        started = time.perf_counter()
        model = acc.fit(target, model=name, **fit_options, **_seed_params(name, random_state))
        fitted[name] = model
        coefficients[name] = coefficient_table(model, level)
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
    return fitted, coefficients, calibration, pd.DataFrame(evidence_rows).set_index("model")


def _predictions(df, model, target, ids, n_cases, level):
    """Predictive probabilities with bounds for the first rows, with the ID columns."""
    cases = df.head(n_cases)
    predictions = cases.bayeslogit.predict_table(model, level=level)
    id_cols = list(ids)
    return predictions[
        id_cols + [target] + [c for c in predictions.columns if c not in df.columns]
    ]


def _ground_truth(df, doubtful):
    """For the demo data: how many listed rows were deliberately mislabelled."""
    if not (df.attrs.get("scenario") and "corrupted" in df.attrs):
        return None
    flipped = set(df.attrs["corrupted"]["lot_id"])
    id_col = df.attrs.get("id_column", "lot_id")
    hits = int(doubtful[id_col].isin(flipped).sum()) if id_col in doubtful else None
    return {"flipped": len(flipped), "doubtful_hits": hits, "listed": len(doubtful)}


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
    lines = [
        f"skbayeslogit report: {report.source}",
        f"target {report.target!r} (classes: {', '.join(report.classes)}); "
        f"{len(report.features)} features: {', '.join(report.features)}",
        CAUTION,
    ]
    lines += [f"read: {line}" for line in report.reading]
    lines += [f"note: {note}" for note in report.notes]
    if report.columns is not None:
        lines.append(_section("Columns: the role of each, and why a column was left out"))
        lines += columns_text(report.columns)
    lines.append(_section("Model comparison (cross-validated, held-out folds)"))
    cols = [
        c for c in ("accuracy", "log_loss", "brier", "ece", "fit_time") if c in report.comparison
    ]
    lines.append(_fmt(report.comparison[cols]))
    lines += _coefficient_text(report)
    lines += _evaluation_text(report)
    lines += _doubtful_text(report)
    pct = f"{round(report.level * 100):d}%"
    lines.append(
        _section(f"Predictive probabilities with {pct} credible bounds ({report.primary})")
    )
    lines.append(_fmt(report.predictions))
    return "\n".join(lines) + "\n"


def _coefficient_text(report):
    pct = f"{round(report.level * 100):d}%"
    lines = []
    for name, table in report.coefficients.items():
        heading = f"{model_title(name)}: coefficients, features standardised ({pct} intervals)"
        lines.append(_section(heading))
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
    return lines


def _evaluation_text(report):
    name = report.primary
    cal = report.calibration[name]
    lines = [
        _section(f"Calibration of {name} on the fitted rows"),
        f"expected calibration error {cal.attrs['ece']:.3f}, Brier {cal.attrs['brier']:.3f}, "
        f"log loss {cal.attrs['log_loss']:.3f} (in-sample; see the comparison for held-out)",
        _section(f"Confusion of {name} at threshold 0.5 (fitted rows)"),
        _fmt(report.confusion),
    ]
    if report.threshold is not None:
        c_fp, c_fn = report.cost
        lines.append(
            _section(
                f"Threshold minimising cost (false positive {c_fp:g}, false negative {c_fn:g})"
            )
        )
        lines.append(_fmt(report.threshold))
    return lines


def _doubtful_text(report):
    lines = [_section("Rows whose labels look doubtful (a prompt to re-check, not a verdict)")]
    shown = report.doubtful
    keep = [c for c in shown.columns if c not in report.features and c != "orchard"]
    lines.append(_fmt(shown[keep]))
    if report.ground_truth is not None:
        gt = report.ground_truth
        lines.append(
            f"demo ground truth: {gt['doubtful_hits']} of these {gt['listed']} rows were "
            f"deliberately mislabelled ({gt['flipped']} of all rows were)."
        )
    return lines


# -- files --------------------------------------------------------------------


def frame_digest(df):
    """SHA-256 of a frame written as CSV (how a manifest records data made in memory)."""
    return sha256_bytes(df.to_csv(index=False).encode("utf-8"))


def write_outputs(report, df, out, *, options=None, input_info=None):
    """Write CSV tables, PNG figures, the model files, report.html and manifest.json.

    The files are written into a staging folder beside ``out`` and moved into
    place at the end: a whole folder appears, or none. A folder an earlier
    report wrote (with its manifest) is replaced whole; any other non-empty
    folder is refused.

    Parameters
    ----------
    report : Report
    df : pandas.DataFrame
        The data the report was built from.
    out : path-like or RunFolder
        The output folder, or a :class:`~skbayeslogit._output.run_folder.RunFolder`
        made (and so checked) before the computation.
    options : dict, optional
        The run's options, recorded in the manifest.
    input_info : dict, optional
        What the manifest records of the input (default: the frame's hash).

    Returns
    -------
    dict
        Final paths written, by kind.
    """
    from . import __version__

    folder = out if isinstance(out, RunFolder) else RunFolder(out, option="out")
    if input_info is None:
        input_info = {"source": report.source, "rows": len(df), "sha256_of_csv": frame_digest(df)}
    with folder:
        staged = write_files(report, df, folder.path, caution=CAUTION)
        folder.write_manifest(options=options or {}, input_info=input_info, version=__version__)
        folder.commit()
    return {kind: [folder.target / p.name for p in paths] for kind, paths in staged.items()}
