"""Files of ``skbayeslogit report --out``: CSV tables, PNG figures, models, one HTML page."""

import base64
import io
from pathlib import Path

import numpy as np

from .evaluation import BINNINGS, calibration_table
from .report_page import render_page


def _drawn(figs, missing, name, draw):
    """Draw one figure into ``figs``, or record in ``missing`` why it could not be."""
    try:
        figs[name] = draw()
    except ImportError as exc:
        missing[name] = str(exc)
    except (TypeError, ValueError, KeyError, ArithmeticError, np.linalg.LinAlgError) as exc:
        # A figure that fails leaves the rest of the report standing, and says why.
        missing[name] = f"{type(exc).__name__}: {exc}"


def _boundary_axes(report, table):
    """The two numeric features with the largest standardised effects, or why there are none."""
    if len(report.classes) != 2:
        return None, f"it is drawn for two classes; the target has {len(report.classes)}"
    if "sign_prob" not in table:
        return None, "the primary model has no posterior to draw"
    slopes = table.drop(index="intercept", errors="ignore")["estimate"].abs()
    numeric = [p for p in slopes.sort_values(ascending=False).index if p in report.features]
    if len(numeric) < 2:
        return None, "it needs two numeric features"
    return numeric[:2], None


def _figures(report, df, calibration):
    """Figures for the page and PNG files, and why any could not be drawn."""
    from ..plotting import calibration_figure, coefficient_figure
    from .figures import calibration_view, coefficient_view

    figs, missing = {}, {}
    acc = df.bayeslogit
    for name, model in report.models.items():
        if hasattr(model, "coef_table"):
            _drawn(
                figs,
                missing,
                f"coefficients_{name}",
                lambda m=model: coefficient_figure(**coefficient_view(m, report.level, False)),
            )
    primary = report.primary
    _drawn(
        figs,
        missing,
        f"calibration_{primary}",
        lambda: calibration_figure(**calibration_view(calibration[primary], report.target)),
    )
    axes, why = _boundary_axes(report, report.coefficients[primary])
    if axes is None:
        missing["boundary"] = why
    else:
        model = report.models[primary]
        _drawn(figs, missing, "boundary", lambda: acc.plot_boundary(model, *axes))
    return figs, missing


def _calibration_tables(report, df):
    """Each model's calibration table in both binnings (equal-width and equal-count)."""
    out = {}
    for name, model in report.models.items():
        given = report.calibration[name]
        if "binning" in given and set(given["binning"]) >= set(BINNINGS):
            out[name] = given
            continue
        bins = given.attrs.get("bins", 10)
        out[name] = calibration_table(df, report.target, model, bins, False, binning="both")
    return out


def _png(fig):
    buf = io.BytesIO()
    fig.savefig(buf, format="png", dpi=110, bbox_inches="tight")
    return buf.getvalue()


def _tables(report, calibration):
    """The report's tables by file name, in the order they are written."""
    tables = {"comparison": report.comparison, "evidence": report.evidence}
    if report.columns is not None:
        tables["columns"] = report.columns
    tables.update({f"coefficients_{n}": t for n, t in report.coefficients.items()})
    if report.corrected_coefficients is not None:
        tables["coefficients_corrected"] = report.corrected_coefficients
    tables.update({f"calibration_{n}": t for n, t in calibration.items()})
    tables.update({f"column_evidence_{n}": t for n, t in report.column_evidence.items()})
    tables.update(confusion=report.confusion, doubtful_labels=report.doubtful)
    rates = report.class_rates
    if rates is not None:
        tables["class_rates"] = rates
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

    used = report.frame if report.frame is not None else df
    calibration = _calibration_tables(report, used)
    for name, frame in _tables(report, calibration).items():
        path = out / f"{name}.csv"
        # Plain tables: their row numbers mean nothing.
        frame.to_csv(path, index=not name.startswith(("columns", "calibration_")))
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
    figs, missing = _figures(report, used, calibration)
    for name, fig in figs.items():
        data = _png(fig)
        path = out / f"{name}.png"
        path.write_bytes(data)
        written["png"].append(path)
        images[name] = base64.b64encode(data).decode("ascii")

    page = out / "report.html"
    page.write_text(render_page(report, calibration, images, missing, caution), encoding="utf-8")
    written["html"].append(page)
    return written
