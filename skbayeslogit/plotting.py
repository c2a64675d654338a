"""Figures for the ``df.bayeslogit`` accessor: coefficients, boundary, calibration.

The functions here only draw: they take tables and arrays the accessor has
already computed, and return a new :class:`matplotlib.figure.Figure`. They
use the object-oriented API on a bare ``Figure`` (no ``pyplot``), so nothing
touches global state or needs a GUI backend; ``fig.savefig("x.png")`` works
anywhere, and notebooks display the figure when it is the cell's value.

The look is meant to survive grey-scale print: series differ by marker,
fill and line style, never by colour alone (``_plots/style.py``); the
reliability diagram lives in ``_plots/calibration.py``.

matplotlib is imported only when a figure is drawn, so that importing the
package stays cheap.
"""

import re

import numpy as np

from ._frame.formatting import level_label
from ._plots.calibration import calibration_figure
from ._plots.style import legend_key, require_matplotlib, series_style, style_axes

__all__ = [
    "axis_label",
    "boundary_figure",
    "calibration_figure",
    "coefficient_figure",
    "require_matplotlib",
]

# Unit suffixes of snake_case column names and the label each stands for.
# Longer suffixes come first so "_kg" is not read as "_g".
_UNIT_SUFFIXES = (
    ("_percent", "%"),
    ("_brix", "°Brix"),
    ("_days", "days"),
    ("_years", "years"),
    ("_hours", "h"),
    ("_min", "min"),
    ("_kpa", "kPa"),
    ("_ppm", "ppm"),
    ("_pct", "%"),
    ("_usd", "USD"),
    ("_eur", "EUR"),
    ("_kg", "kg"),
    ("_mg", "mg"),
    ("_mm", "mm"),
    ("_cm", "cm"),
    ("_ms", "ms"),
    ("_g", "g"),
    ("_c", "°C"),
    ("_f", "°F"),
    ("_n", "N"),
    ("_m", "m"),
    ("_s", "s"),
    ("_h", "h"),
)
_UNIT_PREFIXES = (("days_", "days"), ("years_", "years"), ("hours_", "h"))


def axis_label(name):
    """Readable axis label with units, from a snake_case column name.

    A trailing unit suffix becomes a unit in parentheses (``firmness_n`` ->
    "firmness (N)", ``soluble_solids_brix`` -> "soluble solids (°Brix)",
    ``bruise_share_pct`` -> "bruise share (%)"); a leading ``days_`` marks a
    count of days (``days_since_bloom`` -> "days since bloom (days)").
    Other underscores become spaces; a single word (no inner underscore)
    is returned unchanged.

    Parameters
    ----------
    name : object
        A column name (converted with ``str``).

    Returns
    -------
    str
    """
    name = str(name)
    if "_" not in name.strip("_"):
        # One word (perhaps with edge underscores): nothing to read into it.
        return name
    lower = name.lower()
    for suffix, unit in _UNIT_SUFFIXES:
        stem = name[: -len(suffix)]
        if lower.endswith(suffix) and stem.strip("_"):
            return f"{_words(stem)} ({unit})"
    for prefix, unit in _UNIT_PREFIXES:
        if lower.startswith(prefix) and name[len(prefix) :].strip("_"):
            return f"{_words(name)} ({unit})"
    return _words(name)


def _words(name):
    return re.sub(r"_+", " ", name).strip()


def _draw_coefficient_series(ax, part, params, offset, style):
    """Intervals and estimates of one series, row ``r`` of ``params`` at height n - 1 - r."""
    from matplotlib.lines import Line2D

    marker, ls, grey = style
    for r, param in enumerate(params):
        row = part.loc[param]
        if not np.isfinite(row["estimate"]):
            continue
        ypos = len(params) - 1 - r + offset
        ax.add_line(
            Line2D(
                [row["lower"], row["upper"]],
                [ypos, ypos],
                color=grey,
                lw=1.6,
                ls=ls,
                solid_capstyle="butt",
                gid="interval",
            )
        )
        excludes_zero = row["lower"] > 0 or row["upper"] < 0
        ax.plot(
            [row["estimate"]],
            [ypos],
            marker=marker,
            ms=6.5,
            ls="none",
            color=grey,
            markeredgecolor="0.1",
            markerfacecolor=grey if excludes_zero else "white",
            zorder=3,
            gid="estimate",
        )


def coefficient_figure(table, *, level, xlabel, title=None):
    """Point estimates with credible intervals, one row per feature.

    Parameters
    ----------
    table : pandas.DataFrame
        Columns ``estimate``, ``lower``, ``upper``; index the parameter name
        (one series) or a (class, parameter) MultiIndex (one series per
        class). Rows are drawn top to bottom in table order.
    level : float in (0, 1)
        The credible level of the bounds (for the legend).
    xlabel : str
    title : str, optional

    Returns
    -------
    matplotlib.figure.Figure
        One Axes. Each interval is a Line2D with ``gid="interval"``; filled
        markers mark intervals that exclude zero, open markers those that
        include it.
    """
    Figure = require_matplotlib()

    if getattr(table.index, "nlevels", 1) == 2:
        series = list(dict.fromkeys(table.index.get_level_values(0)))
        params = list(dict.fromkeys(table.index.get_level_values(1)))
    else:
        series = [None]
        params = list(table.index)
    n_rows, n_series = len(params), len(series)
    fig = Figure(
        figsize=(6.4, 1.2 + 0.42 * n_rows * max(1.0, 0.6 * n_series)), layout="constrained"
    )
    ax = fig.add_subplot()
    style_axes(ax)
    ax.axvline(0.0, color="0.5", lw=0.9, ls="--", zorder=1, gid="zero_line")
    # Series of one feature sit side by side within a band of 0.6 row heights.
    # The first series on top, as in the legend.
    offsets = ((n_series - 1) / 2 - np.arange(n_series)) * (0.6 / max(n_series, 1))
    handles = []
    for s, (name, off) in enumerate(zip(series, offsets, strict=True)):
        part = table if name is None else table.xs(name, level=0)
        marker, ls, grey = style = series_style(s)
        _draw_coefficient_series(ax, part.reindex(params), params, off, style)
        if name is not None:
            handles.append(
                legend_key(str(name), color=grey, ls=ls, marker=marker, markeredgecolor="0.1")
            )
    key = {"color": "0.3", "marker": "o", "ls": "none", "markeredgecolor": "0.1"}
    shown = level_label(level)
    handles.append(legend_key(f"{shown} interval excludes 0", **key))
    handles.append(legend_key(f"{shown} interval includes 0", markerfacecolor="white", **key))
    ax.set_yticks(np.arange(n_rows)[::-1], [axis_label(p) for p in params])
    ax.set_ylim(-0.7, n_rows - 0.3)
    ax.autoscale(enable=True, axis="x")
    ax.margins(x=0.08)
    ax.grid(axis="x", color="0.9", lw=0.8)
    ax.set_axisbelow(True)
    ax.set_xlabel(xlabel)
    ax.set_title(
        title or f"Coefficients: posterior mean and {level_label(level)} credible interval",
        fontsize=10,
        loc="left",
    )
    # Below the axes, so that it never hides an interval.
    fig.legend(
        handles=handles,
        fontsize=8,
        frameon=False,
        loc="outside lower center",
        ncols=min(3, len(handles)),
    )
    return fig


def boundary_figure(
    *,
    x_name,
    y_name,
    x,
    y,
    labels,
    classes,
    grid_x,
    grid_y,
    grid_prob,
    draw_lines=None,
    band=None,
    level=0.9,
    note=None,
):
    """Two-feature view of a binary classifier's decision boundary.

    Parameters
    ----------
    x_name, y_name : str
        Column names of the two features (axis labels come from them).
    x, y : ndarray of shape (n_samples,)
        The data.
    labels : ndarray of shape (n_samples,)
        Recorded class of each row, values from ``classes``.
    classes : sequence of length 2
        ``classes[1]`` is the class whose probability ``grid_prob`` holds.
    grid_x, grid_y : ndarray of shape (g,) and (h,)
        The evaluation grid's coordinates.
    grid_prob : ndarray of shape (h, g)
        Predictive P(classes[1]) on the grid; its 0.5 contour is the
        boundary drawn in black.
    draw_lines : ndarray of shape (n_draws, 3), optional
        One posterior draw per row as the line ``a x + b y + c = 0``.
    band : ndarray of shape (h, g), bool, optional
        Where the credible interval of the probability contains 0.5.
    level : float
        The credible level of ``band`` (legend text).
    note : str, optional
        A line under the title (for example which features were held fixed).

    Returns
    -------
    matplotlib.figure.Figure
        Draws are Line2D with ``gid="posterior_draw"``; the data are two
        PathCollections with ``gid="data"``.
    """
    Figure = require_matplotlib()
    from matplotlib.lines import Line2D
    from matplotlib.patches import Patch

    fig = Figure(figsize=(6.4, 6.0), layout="constrained")
    ax = fig.add_subplot()
    style_axes(ax)
    x0, x1 = float(grid_x[0]), float(grid_x[-1])
    y0, y1 = float(grid_y[0]), float(grid_y[-1])
    handles = []
    if band is not None and np.any(band):
        # A pale fill with a dotted edge: visible in grey-scale print
        # without hiding the points inside it.
        ax.contourf(
            grid_x, grid_y, band.astype(float), levels=[0.5, 1.5], colors=["0.9"], zorder=0
        )
        ax.contour(
            grid_x,
            grid_y,
            band.astype(float),
            levels=[0.5],
            colors=["0.45"],
            linewidths=0.8,
            linestyles=":",
            zorder=1,
        )
        handles.append(
            Patch(
                facecolor="0.9",
                edgecolor="0.45",
                ls=":",
                label=f"{level_label(level)} credible interval of P contains 0.5",
            )
        )
    if draw_lines is not None and len(draw_lines):
        xs = np.array([x0, x1])
        for a, b, c in draw_lines:
            if abs(b) > 1e-12 * max(abs(a), 1e-300):
                line = Line2D(xs, -(a * xs + c) / b)
            else:  # vertical boundary
                line = Line2D([-c / a] * 2, [y0, y1])
            line.set(color="0.35", lw=0.8, alpha=0.55, gid="posterior_draw", zorder=2)
            ax.add_line(line)
        handles.append(
            legend_key(
                f"boundaries of {len(draw_lines)} posterior draws", color="0.35", lw=0.8, alpha=0.7
            )
        )
    ax.contour(grid_x, grid_y, grid_prob, levels=[0.5], colors=["0.0"], linewidths=2.2, zorder=4)
    handles.append(legend_key("P = 0.5 (predicted probability)", color="0.0", lw=2.2))
    styles = (
        {"marker": "o", "facecolors": "white", "edgecolors": "0.15"},
        {"marker": "^", "facecolors": "0.25", "edgecolors": "0.05"},
    )
    for cls, style in zip(classes, styles, strict=True):
        mask = labels == cls
        ax.scatter(
            x[mask], y[mask], s=22, linewidths=0.8, label=str(cls), zorder=3, gid="data", **style
        )
        handles.append(
            legend_key(
                f"recorded {cls}",
                ls="none",
                marker=style["marker"],
                markersize=6,
                markerfacecolor=style["facecolors"],
                markeredgecolor=style["edgecolors"],
            )
        )
    ax.set_xlim(x0, x1)
    ax.set_ylim(y0, y1)
    ax.set_xlabel(axis_label(x_name))
    ax.set_ylabel(axis_label(y_name))
    title = f"Decision boundary: P({classes[1]}) = 0.5"
    ax.set_title(title if note is None else f"{title}\n{note}", fontsize=10, loc="left")
    # Below the axes, so that it never hides data.
    fig.legend(handles=handles, fontsize=8, frameon=False, loc="outside lower center", ncols=2)
    return fig
