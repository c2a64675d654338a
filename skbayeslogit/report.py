"""The whole job on one table: the computations behind ``skbayeslogit report``.

:func:`build_report` runs, on a DataFrame with a label column, everything a
practitioner hands over: a cross-validated comparison of the models, the
coefficient tables with credible intervals (features standardised, so that
one prior scale fits all; both scales reported), the prior scale chosen by
the Laplace evidence, the rows with doubtful labels, the calibration, the
cost-minimising threshold, and predictive probabilities with intervals for
every row; first of all, a summary of the findings in plain sentences.
:func:`render_text` prints it; :func:`write_outputs` writes CSV tables, PNG
figures, the fitted models and one self-contained HTML page.

Everything it reports is a statistical screening aid. Where a decision
affects people, the report says so, and it does not replace domain review.
"""

from dataclasses import dataclass, field

import numpy as np
import pandas as pd
from sklearn.utils.multiclass import type_of_target

from . import accessor  # noqa: F401  (registers df.bayeslogit)
from ._frame.arguments import check_positive_int
from ._frame.file_lines import row_lines
from ._frame.orientation import positive_index
from ._frame.predictions import every_row_table
from ._frame.registry import MODELS, available_models, binary_only, make_model
from ._frame.report_columns import choose_columns, evidence_by_model, used_rows
from ._frame.report_files import write_files
from ._frame.report_steps import (
    checked_approximation,
    checked_verdict,
    confusion_tables,
    doubtful_rows,
    fit_models,
    ground_truth,
    held_out_comparison,
    probabilities,
    separated_classes,
)
from ._frame.report_text import report_text
from ._frame.rows import missing_policy
from ._frame.summary import findings
from ._output.run_folder import RunFolder, sha256_bytes

CAUTION = (
    "Caution: these probabilities, intervals and label checks are a statistical "
    "screening aid. Where a decision affects people (medical, credit, safety), they "
    "do not replace review by someone who knows the domain."
)


@dataclass
class Report:
    """Everything ``build_report`` computed; tables are pandas DataFrames.

    The row-level tables hold every row (the files hold them whole); the
    terminal text and the page show the first ones.

    Attributes
    ----------
    summary : list of str
        The findings in plain sentences, the first section of the text and
        the page: which columns matter (strongest evidence first, with
        direction), how sure, which model did best held out and by how
        much, the calibration verdict, how many rows to re-check and why,
        and warnings (separated classes, a prior scale at the edge of its
        search, the approximation check).
    confusion : pandas.DataFrame
        Binary: the calls at threshold 0.5 for the positive class (one row:
        counts tp, fp, fn, tn and rates). Multiclass: a K x K table, index
        ``recorded`` (the recorded label), columns ``predicted`` (the most
        probable class), integer counts, or weight sums when a weight
        column was given; ``attrs["accuracy"]`` is the share on the
        diagonal (argmax accuracy).
    class_rates : pandas.DataFrame or None
        Multiclass: per class ``recall`` (sensitivity), ``precision``,
        ``support`` (rows, or weight). None for a binary target.
    doubtful : pandas.DataFrame
        The complete doubtful list, most doubtful first
        (:mod:`~skbayeslogit._frame.doubtful` says which rows and why this
        ranking): the ID columns, ``line``, the target column (the
        recorded label), ``most_likely_label``, ``prob_recorded_label`` and
        ``odds_against_label`` (the ranking score); no feature columns.
        ``attrs["model"]`` names the model that scored it.
    top : int
        How many doubtful rows the text and the page show (``--top``).
    predictions : pandas.DataFrame
        Every used row: the ID columns, ``line``, the target, then for the
        positive class (binary) or each class (multiclass) ``prob_<c>``,
        ``prob_<c>_median``, ``prob_<c>_lower``, ``prob_<c>_upper``,
        ``oof_prob_<c>``, and ``predicted_label``. ``prob_<c>`` is the
        posterior predictive mean, the probability to act on; lower and
        upper are equal-tailed posterior quantiles of that probability at
        ``level``, and the median its 50% quantile, always inside them. The
        mean of a skewed posterior (near 0 or 1) can fall outside the
        central interval; the median cannot, which is why both are given.
        ``oof_prob_<c>`` is the probability from the cross-validation fold
        that held the row out. A model without a posterior (tempered) has
        no median or bounds.
    approximation : ApproximationCheck or None
        ``check_approximation`` of the primary model, seeded with the run's
        seed; None for a model without a Laplace posterior, or when the
        check failed (a note says why).
    approximation_verdict : str or None
        The check's verdict in plain words (``approximation_verdict`` of
        ``_frame/approximation.py``).
    corrected_coefficients : DataFrame or None
        When the check finds the fast posterior unreliable: the primary
        model's coefficient table corrected by the importance-weighted draws
        (features standardised, as the report's own tables).

    Notes
    -----
    ``line`` is the line of the input file on which the row starts (the
    header is line 1, so the first data row of a plain export is line 2);
    for a DataFrame given without a file it is the row's 1-based position in
    that frame. Rows left out (``--missing drop``) keep their own numbers.
    """

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
    frame: pd.DataFrame | None = None  # the rows used (after --missing drop)
    columns: pd.DataFrame | None = None  # columns.csv: every column's role and reason
    column_evidence: dict = field(default_factory=dict)
    reading: list = field(default_factory=list)  # how the file was read
    summary: list = field(default_factory=list)
    class_rates: pd.DataFrame | None = None
    top: int = 20
    approximation: object = None
    approximation_verdict: str | None = None
    corrected_coefficients: pd.DataFrame | None = None
    n_cases: int = 5  # prediction rows shown in the text


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
    top=20,
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
        Seeds every random draw: the folds, the ``random_state`` of each
        model that takes one (its posterior draws, hence the multiclass
        credible bounds), the approximation check and the calibration
        check.
    n_cases : int
        How many prediction rows the text shows (the table holds all).
    top : int >= 1
        How many doubtful rows the text and the page show (the table holds
        all).
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
        of the file (its line numbers go into the row tables).

    Returns
    -------
    Report
    """
    if (cost_fp is None) != (cost_fn is None):
        raise ValueError("give both --cost-fp and --cost-fn, or neither.")
    top = check_positive_int("top", top)
    reading = columns.pop("reading", None)
    scenario, df = _without_attrs(df)
    lines, line_note = row_lines(df, reading)
    notes = [line_note] if line_note else []
    columns["missing"] = missing_policy(columns.get("missing"), dropna)
    choice = choose_columns(df, target, {**columns, "features": features}, reading)
    df, lines = _used_rows_and_lines(df, lines, target, choice.features, columns["missing"], notes)
    feats, fit_options = choice.features, choice.fit_options
    n_classes = _count_classes(df, target)
    chosen = _chosen_models(models, n_classes, target, notes)
    primary = chosen[0]
    _progress(progress, f"cross-validating {', '.join(chosen)} ({cv} folds)...")
    seeded = {name: make_model(name, **_seed_params(name, random_state)) for name in chosen}
    comparison, held_out = held_out_comparison(df, target, seeded, cv, random_state, fit_options)
    fits = fit_models(
        df, target, fit_options, chosen, level,
        lambda name: _seed_params(name, random_state), progress,
    )  # fmt: skip
    primary_model = fits.models[primary]
    held = held_out.get(primary)
    rows = _row_tables(df, target, fits, primary, choice, lines, level, top, held)
    rows["ground_truth"] = ground_truth(scenario, rows["doubtful"], top)
    rows.update(_checked(df, target, fits, primary, choice, random_state, notes, level))
    if cost_fp is not None:
        if n_classes == 2:
            rows["threshold"] = df.bayeslogit.cost_threshold(
                target, primary_model, cost_fp, cost_fn
            )
        else:
            notes.append("cost thresholds apply to binary targets only; skipped.")
    report = Report(
        source=source,
        target=target,
        features=feats,
        classes=[str(c) for c in primary_model.classes_],
        level=level,
        models=fits.models,
        comparison=comparison,
        coefficients=fits.coefficients,
        evidence=fits.evidence,
        calibration=fits.calibration,
        top=top,
        primary=primary,
        notes=choice.statements + notes,
        cost=None if cost_fp is None else (float(cost_fp), float(cost_fn)),
        frame=df,
        columns=choice.table,
        column_evidence=evidence_by_model(fits.models),
        reading=[] if reading is None else reading.summary_lines(),
        n_cases=n_cases,
        **rows,
    )
    if held is not None:
        _, classes, codes = probabilities(df, target, primary_model)
        held = (held, codes, positive_index(primary_model, len(classes)))
    report.summary = findings(report, fits, held, random_state)
    return report


def _without_attrs(df):
    """The frame's ``attrs`` and a view of it without them.

    The demo's ground truth rides in ``attrs``, which pandas deep-copies on
    every column read; the computations run on the view.
    """
    view = df.copy(deep=False)
    view.attrs = {}
    return df.attrs, view


def _checked(df, target, fits, primary, choice, seed, notes, level):
    """The primary model's approximation check and its verdict (the Report's
    ``approximation*`` fields); records separated classes in ``fits``."""
    model = fits.models[primary]
    fits.separated_classes = separated_classes(df, target, model, choice.weight, notes)
    check = checked_approximation(df, target, model, seed, notes)
    return {"approximation": check, **checked_verdict(check, model, level)}


def _row_tables(df, target, fits, primary, choice, lines, level, top, held_out):
    """The doubtful list, the confusion and the predictions (see :class:`Report`)."""
    model = fits.models[primary]
    robust = "tempered" if "tempered" in fits.models else primary
    doubtful = doubtful_rows(df, target, fits.models[robust], choice.ids, lines, choice.weight)
    doubtful.attrs["model"] = robust
    confusion, rates = confusion_tables(df, target, model, choice.weight)
    return {
        "doubtful": doubtful,
        "confusion": confusion,
        "class_rates": rates,
        "threshold": None,
        "predictions": every_row_table(
            df, model, level, target=target, ids=choice.ids, lines=lines, held_out=held_out
        ),
    }


def _used_rows_and_lines(df, lines, target, feats, policy, notes):
    """The rows the report uses (see ``used_rows``) and their line numbers."""
    # The line numbers ride along as a column, so that whatever rows are left
    # out, each kept row keeps its own number (the index may repeat values).
    key = "\x00line"
    while key in df.columns:
        key += "\x00"
    used = used_rows(df.assign(**{key: lines.to_numpy()}), target, feats, policy, notes)
    kept = used[key].to_numpy()
    return used.drop(columns=key), kept


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


def render_text(report):
    """The concise, aligned terminal text of a :class:`Report`, the Summary first."""
    return report_text(report, CAUTION)


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
