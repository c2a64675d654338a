"""report.html: the report's sections, rendered from the package's Jinja2 template.

The page opens with the caution and the Summary, then the data and its
columns, the comparison of the models, what each column is worth, the
coefficients, calibration, confusion, costs, the doubtful labels and the
predictions. It is one self-contained file: the style sheet is inline and
the figures are embedded as base64 PNG, so it opens offline. Every table
comes from :mod:`.page_tables` (significant digits, at most a few columns
on screen); a figure that could not be drawn is named on the page with the
reason, where it would have been.
"""

import jinja2
import pandas as pd

from .formatting import level_label, significant
from .page_tables import SHOWN_COLUMNS, folded_table, row_labels, table
from .registry import model_title

# How many predictions the page lists (predictions.csv holds every row).
SHOWN_PREDICTIONS = 10
# How many doubtful rows the page lists when the report does not say.
_BOUNDS = ("_lower", "_upper")
# A K x K confusion table this wide goes behind <details>.
WIDEST_CONFUSION = 10


def _environment():
    return jinja2.Environment(
        loader=jinja2.PackageLoader("skbayeslogit", "templates"),
        autoescape=True,
        undefined=jinja2.StrictUndefined,
        trim_blocks=True,
        lstrip_blocks=True,
    )


def render_page(report, calibration, images, missing, caution):
    """The page as text.

    Parameters
    ----------
    report : Report
    calibration : dict
        Model name -> calibration table in both binnings.
    images : dict
        Figure name -> base64 PNG.
    missing : dict
        Figure name -> why it could not be drawn.
    caution : str
        The screening-aid notice shown at the top.
    """
    figures = _Figures(images, missing)
    sections = [
        _summary(report),
        _data(report),
        _comparison(report),
        *_evidence(report),
        *_coefficients(report, figures),
        _corrected(report),
        _calibration(report, calibration, figures),
        _confusion(report),
        _costs(report),
        _doubtful(report),
        _predictions(report),
    ]
    return (
        _environment()
        .get_template("report.html.j2")
        .render(
            title=f"skbayeslogit report: {report.source}",
            source=report.source,
            target=report.target,
            classes=", ".join(report.classes),
            features=", ".join(report.features),
            caution=caution,
            sections=[s for s in sections if s is not None],
            leftover=figures.leftover(),
        )
    )


class _Figures:
    """The figures by name; each is placed once, and the rest listed at the end."""

    def __init__(self, images, missing):
        self.images, self.missing, self.placed = images, missing, set()

    def take(self, *names):
        out = []
        for name in names:
            if name in self.images:
                out.append({"name": name, "data": self.images[name]})
            elif name in self.missing:
                out.append({"name": name, "missing": self.missing[name]})
            self.placed.add(name)
        return out

    def leftover(self):
        names = [n for n in {**self.images, **self.missing} if n not in self.placed]
        return self.take(*names)


def _section(key, title, *, lines=(), tables=(), figures=(), points=()):
    return {
        "key": key,
        "title": title,
        "lines": list(lines),
        "tables": list(tables),
        "figures": list(figures),
        "points": list(points),
    }


def _ids(report):
    columns = report.columns
    if columns is None or "role" not in columns:
        return []
    return [str(c) for c in columns.loc[columns["role"] == "id", "column"]]


def _summary(report):
    sentences = report.summary
    if not sentences:
        return None
    return _section("summary", "Summary", points=sentences)


def _data(report):
    lines = [f"Read: {line}" for line in report.reading]
    lines += [f"Note: {note}" for note in report.notes]
    tables = []
    if report.columns is not None:
        tables.append(table(report.columns.set_index("column"), "columns"))
    return _section(
        "data", "Columns: the role of each, and why a column was left out", lines=lines,
        tables=tables,
    )  # fmt: skip


def _comparison(report):
    comp = report.comparison
    shown = pd.DataFrame(index=comp.index)
    for name in ("accuracy", "log_loss", "brier", "ece"):
        if name not in comp.columns:
            continue
        sd = comp[f"{name}_sd"] if f"{name}_sd" in comp else None
        shown[f"{name} (± sd)"] = [
            significant(v) if sd is None else f"{significant(v)} ± {significant(sd.loc[i])}"
            for i, v in comp[name].items()
        ]
    metrics = ("accuracy", "log_loss", "brier", "ece")
    for name in comp.columns:
        if name not in metrics and not str(name).endswith("_sd"):
            shown[name] = comp[name]
    return _section(
        "comparison",
        "Model comparison (cross-validated, held-out folds)",
        lines=["Mean over the folds ± its standard deviation; all numbers in comparison.csv."],
        tables=[
            table(shown, "comparison"),
            table(report.evidence, "evidence", caption="Prior scale and evidence"),
        ],
    )


def _corrected(report):
    frame = report.corrected_coefficients
    if frame is None:
        return None
    level = level_label(report.level)
    renamed = frame.rename(columns={"lower": f"lower {level}", "upper": f"upper {level}"})
    key = ["estimate", "sd", f"lower {level}", f"upper {level}", "sign_prob"]
    return _section(
        "coefficients_corrected",
        f"{model_title(report.primary)}: coefficients corrected by the approximation check",
        lines=[report.approximation_verdict],
        tables=[table(renamed, "coefficients_corrected", shown=key)],
    )


def _evidence(report):
    return [
        _section(
            f"evidence_{name}",
            f"{model_title(name)}: evidence per column",
            tables=[table(frame, f"evidence_{name}")],
        )
        for name, frame in report.column_evidence.items()
    ]


def _coefficients(report, figures):
    level = level_label(report.level)
    out = []
    for name, frame in report.coefficients.items():
        has_bounds = "lower" in frame.columns
        renamed = frame.rename(columns={"lower": f"lower {level}", "upper": f"upper {level}"})
        key = ["estimate", "sd", f"lower {level}", f"upper {level}", "sign_prob"]
        heading = f"{model_title(name)}: coefficients, features standardised"
        if has_bounds:
            heading += f" ({level} intervals)"
            note = (
                "sign_prob: posterior probability that the coefficient has the sign of its "
                "estimate (not a p-value). The columns ending in _original are per recorded "
                "unit of the feature."
            )
        else:
            heading += " (point estimates)"
            note = "This model has no posterior, so its coefficients have no intervals."
        out.append(
            _section(
                f"coefficients_{name}",
                heading,
                tables=[table(renamed, f"coefficients_{name}", shown=key, note=note)],
                figures=figures.take(f"coefficients_{name}"),
            )
        )
    return out


def _bin_rows(frame):
    """The bins as readable rows: a range instead of two edge columns and a bin number."""
    shown = frame.drop(columns=["bin", "bin_lower", "bin_upper"], errors="ignore")
    ranges = [
        f"{significant(lo)} to {significant(hi)}"
        for lo, hi in zip(frame["bin_lower"], frame["bin_upper"], strict=True)
    ]
    at = 1 + ("class" in shown.columns) if "binning" in shown.columns else 0
    shown.insert(at, "probabilities", ranges)
    return shown.rename(columns={"count": "rows"})


def _calibration(report, calibration, figures):
    name = report.primary
    cal = calibration.get(name, report.calibration[name])
    attrs = cal.attrs
    by_binning = attrs.get("ece_by_binning", {"uniform": attrs["ece"]})
    ece = pd.DataFrame(
        {
            "bins": [int((cal["binning"] == b).sum()) if "binning" in cal else len(cal)
                     for b in by_binning],
            "expected calibration error": list(by_binning.values()),
        },
        index=pd.Index(["equal-width" if b == "uniform" else "equal-count"
                        for b in by_binning], name="binning"),
    )  # fmt: skip
    if "class" in cal.columns:
        ece["bins"] = ece["bins"] // len(attrs["classes"])
    weighted = attrs.get("weight_total", attrs["n"]) != attrs["n"]
    lines = [
        f"Brier score {significant(attrs['brier'])}, log loss {significant(attrs['log_loss'])} "
        "on the fitted rows (in-sample; the comparison above is held-out)"
        + (", every row counted by its weight." if weighted else "."),
        "Equal-width bins split the probability scale evenly; equal-count bins hold the same "
        "number of rows each, so a crowded part of the scale is not one bin.",
    ]
    bins = folded_table(
        _bin_rows(cal), f"calibration_{name}", show_index=False,
        label=f"Every bin ({len(cal)} rows; also in calibration_{name}.csv)",
    )  # fmt: skip
    return _section(
        "calibration", f"Calibration ({model_title(name)})", lines=lines,
        tables=[table(ece, "calibration_scores"), bins],
        figures=figures.take(f"calibration_{name}", "boundary"),
    )  # fmt: skip


def _confusion(report):
    conf = report.confusion
    name = report.primary
    rates = report.class_rates
    if "tp" in conf.columns:
        tables = [
            table(conf, "confusion", shown=["tp", "fp", "fn", "tn", "sensitivity", "specificity"])
        ]
        title = f"Confusion of {name} at threshold 0.5 (fitted rows)"
    else:
        accuracy = conf.attrs.get("accuracy")
        caption = "Rows: the recorded label; columns: the most probable label."
        if accuracy is not None:
            caption += f" Accuracy (most probable label): {significant(accuracy)}."
        tables = (
            [table(conf, "confusion", shown=list(conf.columns), caption=caption)]
            if conf.shape[1] <= WIDEST_CONFUSION
            else [folded_table(conf, "confusion", label="The confusion table", caption=caption)]
        )
        title = f"Confusion of {name}: recorded against most probable label (fitted rows)"
    if rates is not None:
        tables.append(table(rates, "class_rates", caption="Per class"))
    return _section("confusion", title, tables=tables)


def _costs(report):
    if report.threshold is None:
        return None
    c_fp, c_fn = report.cost if report.cost is not None else (None, None)
    title = "Threshold minimising cost"
    if c_fp is not None:
        title += f" (false positive {significant(c_fp)}, false negative {significant(c_fn)})"
    key = ["threshold", "sensitivity", "specificity", "cost", "cost_per_row"]
    return _section("costs", title, tables=[table(report.threshold, "cost_threshold", shown=key)])


def _doubtful(report):
    frame = report.doubtful
    top = report.top
    listed = row_labels(frame.head(top), _ids(report))
    features = set(report.features)
    shown = [c for c in listed.columns if c not in features]
    lines = ["A prompt to re-check these records, not a verdict."]
    if len(frame) > len(listed):
        lines.append(
            f"The first {len(listed)} of {len(frame)} rows; all of them in doubtful_labels.csv."
        )
    gt = report.ground_truth
    if gt is not None and gt.get("doubtful_hits") is not None:
        lines.append(
            f"Demo ground truth: {gt['doubtful_hits']} of these {gt['listed']} rows were "
            f"deliberately mislabelled ({gt['flipped']} of all rows were)."
        )
    folded = "The feature values of these rows"
    return _section(
        "doubtful", "Rows whose labels look doubtful", lines=lines,
        tables=[table(listed, "doubtful", shown=shown, folded=folded)],
    )  # fmt: skip


def _predictions(report):
    frame = report.predictions
    listed = row_labels(frame.head(SHOWN_PREDICTIONS), _ids(report))
    level = level_label(report.level)
    lines = []
    if len(frame) > len(listed):
        lines.append(f"The first {len(listed)} of {len(frame)} rows; all in predictions.csv.")
    # The labels, then the probabilities; their bounds fold away first.
    columns = [str(c) for c in listed.columns]
    labels = [c for c in (report.target, "predicted_label") if c in columns]
    probabilities = [c for c in columns if c.startswith("prob_") and not c.endswith(_BOUNDS)]
    shown = labels + probabilities + [c for c in columns if c not in labels + probabilities]
    return _section(
        "predictions",
        f"Predictive probabilities with {level} credible bounds ({report.primary})",
        lines=lines,
        tables=[table(listed, "predictions", shown=shown[:SHOWN_COLUMNS])],
    )
