"""Files of ``skbayeslogit report --out``: CSV tables, PNG figures, models, one HTML page."""

import base64
import html
import io
from pathlib import Path

from .registry import model_title


def _figures(report, df):
    """Figures for the HTML page and PNG files; empty without matplotlib."""
    try:
        from ..plotting import require_matplotlib

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


def _tables(report):
    """The report's tables by file name, in the order they are written."""
    tables = {"comparison": report.comparison, "evidence": report.evidence}
    if report.columns is not None:
        tables["columns"] = report.columns
    tables.update({f"coefficients_{n}": t for n, t in report.coefficients.items()})
    tables.update({f"calibration_{n}": t for n, t in report.calibration.items()})
    tables.update({f"column_evidence_{n}": t for n, t in report.column_evidence.items()})
    tables.update(confusion=report.confusion, doubtful_labels=report.doubtful)
    if report.threshold is not None:
        tables["cost_threshold"] = report.threshold
    tables["predictions"] = report.predictions
    return tables


def write_files(report, df, out_dir, caution):
    """Write CSV tables, PNG figures, the fitted models and report.html into ``out_dir``.

    ``out_dir`` is an existing folder (the staging folder of a run);
    ``caution`` is the screening-aid notice the page shows at the top.

    Returns
    -------
    dict
        Paths written, by kind.
    """
    from .._output.model_file import SUFFIX, save_model_file

    out = Path(out_dir)
    written = {"csv": [], "png": [], "model": [], "html": []}

    for name, frame in _tables(report).items():
        path = out / f"{name}.csv"
        # columns.csv is a plain table: its row numbers mean nothing.
        frame.to_csv(path, index=name != "columns")
        written["csv"].append(path)

    for name, model in report.models.items():
        path = out / f"model_{name}{SUFFIX}"
        save_model_file(
            path,
            model,
            model_name=name,
            target=report.target,
            features=report.features,
            classes=report.classes,
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
    page.write_text(_html(report, images, caution), encoding="utf-8")
    written["html"].append(page)
    return written


def _table_html(frame, digits=3):
    return frame.to_html(float_format=lambda v: f"{v:.{digits}f}", na_rep="-", border=0)


def _html_table(parts, heading, frame):
    parts.append(f"<h2>{heading}</h2>")
    parts.append(_table_html(frame))


def _html_image(parts, images, key):
    if key in images:
        parts.append(f"<img alt='{key}' src='data:image/png;base64,{images[key]}'>")


def _html(report, images, caution):
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
        f"<p class='caution'>{esc(caution)}</p>",
    ]
    parts += [f"<p>Read: {esc(line)}</p>" for line in report.reading]
    parts += [f"<p><em>Note: {esc(note)}</em></p>" for note in report.notes]
    if report.columns is not None:
        parts.append("<h2>Columns: the role of each, and why a column was left out</h2>")
        parts.append(_table_html(report.columns.set_index("column")))
    _html_table(parts, "Model comparison (cross-validated)", report.comparison)
    _html_table(parts, "Prior scale and evidence", report.evidence)
    for name, table in report.column_evidence.items():
        _html_table(parts, f"{esc(model_title(name))}: evidence per column", table)
    for name, table in report.coefficients.items():
        _html_table(parts, f"{esc(model_title(name))}: coefficients ({pct})", table)
        _html_image(parts, images, f"coefficients_{name}")
    _html_table(parts, f"Calibration ({esc(report.primary)})", report.calibration[report.primary])
    for key in (f"calibration_{report.primary}", "boundary"):
        _html_image(parts, images, key)
    _html_table(parts, "Confusion at threshold 0.5", report.confusion)
    if report.threshold is not None:
        _html_table(parts, "Cost-minimising threshold", report.threshold)
    parts.append(
        "<h2>Doubtful labels</h2><p>A prompt to re-check these records, not a verdict.</p>"
    )
    parts.append(_table_html(report.doubtful))
    _html_table(parts, f"Predictions with {pct} credible bounds", report.predictions)
    parts.append("</body></html>")
    return "\n".join(parts)
