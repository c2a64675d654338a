"""The report as terminal text: the Summary first, then the tables, numbers readable.

Every number goes through :mod:`~skbayeslogit._frame.formatting`
(significant digits, integers whole, a missing value as ``-``) and every
credible level is printed as the exact percentage it is.
"""

from .formatting import format_frame, frame_text, level_label, significant
from .registry import model_title
from .report_columns import columns_text


def _section(title):
    return f"\n{title}\n{'-' * len(title)}"


def _plain(frame):
    """A table without its row labels (pandas positions mean nothing to a reader)."""
    return format_frame(frame.reset_index(drop=True)).to_string(index=False)


def report_text(report, caution):
    """The text of a :class:`~skbayeslogit.report.Report`.

    Parameters
    ----------
    report : Report
    caution : str
        The screening-aid notice, printed near the top.

    Returns
    -------
    str
    """
    lines = [
        f"skbayeslogit report: {report.source}",
        f"target {report.target!r} (classes: {', '.join(report.classes)}); "
        f"{len(report.features)} features: {', '.join(report.features)}",
        caution,
        _section("Summary"),
    ]
    lines += [f"- {sentence}" for sentence in report.summary]
    lines += [f"read: {line}" for line in report.reading]
    lines += [f"note: {note}" for note in report.notes]
    if report.columns is not None:
        lines.append(_section("Columns: the role of each, and why a column was left out"))
        lines += columns_text(report.columns)
    lines.append(_section("Model comparison (cross-validated, held-out folds)"))
    cols = [
        c for c in ("accuracy", "log_loss", "brier", "ece", "fit_time") if c in report.comparison
    ]
    lines.append(frame_text(report.comparison[cols]))
    lines += _coefficient_text(report)
    lines += _evaluation_text(report)
    lines += _doubtful_text(report)
    lines += _prediction_text(report)
    return "\n".join(lines) + "\n"


def _coef_columns(table, level):
    pct = level_label(level)
    keep = [c for c in ("estimate", "sd", "lower", "upper", "sign_prob") if c in table.columns]
    out = table[keep].copy()
    if "estimate_original" in table.columns:
        out["estimate_per_unit"] = table["estimate_original"]
    return out.rename(columns={"lower": f"lower_{pct}", "upper": f"upper_{pct}"})


def _coefficient_text(report):
    lines = []
    for name, table in report.coefficients.items():
        has_bounds = "lower" in table.columns
        which = f"{level_label(report.level)} intervals" if has_bounds else "point estimates only"
        heading = f"{model_title(name)}: coefficients, features standardised ({which})"
        lines.append(_section(heading))
        ev = report.evidence.loc[name]
        if ev["log_evidence"] is not None and ev["log_evidence"] == ev["log_evidence"]:
            lines.append(
                f"prior scale chosen by the Laplace evidence: {significant(ev['prior_scale'])} "
                f"(log evidence {significant(ev['log_evidence'])})"
            )
        lines.append(frame_text(_coef_columns(table, report.level)))
        if "sign_prob" in table.columns:
            lines.append(
                "sign_prob: posterior probability that the coefficient has the sign of its "
                "estimate (not a p-value); estimate_per_unit: per recorded unit."
            )
        else:
            lines.append("This model has no posterior, so no intervals; estimate_per_unit: "
                         "per recorded unit.")  # fmt: skip
    return lines


def _evaluation_text(report):
    name = report.primary
    cal = report.calibration[name]
    lines = [
        _section(f"Calibration of {name} on the fitted rows"),
        f"expected calibration error {significant(cal.attrs['ece'])}, Brier "
        f"{significant(cal.attrs['brier'])}, log loss {significant(cal.attrs['log_loss'])} "
        "(in-sample; see the comparison and the summary for held-out)",
    ]
    if report.class_rates is None:
        lines += [
            _section(f"Confusion of {name} at threshold 0.5 (fitted rows)"),
            frame_text(report.confusion),
        ]
    else:
        accuracy = significant(report.confusion.attrs["accuracy"])
        lines += [
            _section(f"Confusion of {name}: recorded (rows) by most probable class (columns)"),
            frame_text(report.confusion),
            f"accuracy of the most probable class: {accuracy} (fitted rows)",
            frame_text(report.class_rates),
        ]
    if report.threshold is not None:
        c_fp, c_fn = report.cost
        lines.append(
            _section(
                "Threshold minimising cost (false positive "
                f"{significant(c_fp)}, false negative {significant(c_fn)})"
            )
        )
        lines.append(frame_text(report.threshold))
    return lines


def _doubtful_text(report):
    doubtful = report.doubtful
    model = doubtful.attrs.get("model", report.primary)
    lines = [
        _section("Rows whose labels look doubtful (a prompt to re-check, not a verdict)"),
        f"{len(doubtful)} rows have a recorded label the {model} model finds improbable "
        "with every class counted as equally common; the first "
        f"{min(report.top, len(doubtful))} by the odds against that label "
        "(odds_against_label; prob_recorded_label and most_likely_label are the model's "
        "own, class frequencies included):",
    ]
    if len(doubtful):
        lines.append(_plain(doubtful.head(report.top)))
    gt = report.ground_truth
    if gt is not None and gt.get("top_hits") is not None:
        lines.append(
            f"demo ground truth: {gt['top_hits']} of these {gt['top']} rows were deliberately "
            f"mislabelled ({gt['listed_hits']} of all {gt['listed']} listed; {gt['flipped']} "
            "rows were mislabelled in all)."
        )
    return lines


def _prediction_text(report):
    table = report.predictions
    shown = table.head(report.n_cases)
    pct = level_label(report.level)
    binary = len(report.classes) == 2
    if not binary:
        # Per-class medians and bounds would not fit a terminal; the file has them.
        detail = ("_median", "_lower", "_upper")
        shown = shown[[c for c in shown.columns if not c.endswith(detail)]]
    lines = [
        _section(
            f"Predictive probabilities with {pct} credible bounds ({report.primary}), "
            f"first {len(shown)} of {len(table)} rows"
        ),
        _plain(shown),
        "prob: posterior mean (the probability to act on); median, lower, upper: posterior "
        "quantiles of that probability (the mean can sit outside the interval when the "
        "posterior is skewed); oof_prob: from the cross-validation fold that held the row out.",
    ]
    if not binary:
        lines.append("Per-class medians and bounds are in the predictions table (CSV).")
    return lines
