"""Figures for the ``df.bayeslogit`` accessor: coefficients, boundary, calibration.

The functions here only draw: they take tables and arrays the accessor has
already computed, and return a new :class:`matplotlib.figure.Figure`. They
use the object-oriented API on a bare ``Figure`` (no ``pyplot``), so nothing
touches global state or needs a GUI backend; ``fig.savefig("x.png")`` works
anywhere, and notebooks display the figure when it is the cell's value.

The look is meant to survive grey-scale print: series differ by marker,
fill and line style, never by colour alone.

matplotlib is an optional dependency (the ``plot`` extra); it is imported
only when a figure is drawn.
"""

import re

import numpy as np
from scipy.stats import norm

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

# Marker, fill and line style per series: distinguishable without colour.
_MARKERS = ("o", "s", "^", "D", "v", "P", "X")
_LINESTYLES = ("-", "--", ":", "-.")
_GREYS = ("0.1", "0.45", "0.65", "0.3", "0.55")


def require_matplotlib():
    """Import matplotlib's Figure class or say how to install it.

    Returns
    -------
    type
        :class:`matplotlib.figure.Figure`.

    Raises
    ------
    ImportError
        When matplotlib is not installed, naming the ``plot`` extra.
    """
    try:
        from matplotlib.figure import Figure
    except ImportError as exc:
        raise ImportError(
            "plotting needs matplotlib, which is not installed; install the plot "
            'extra: pip install "skbayeslogit[plot]"'
        ) from exc
    return Figure


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


def _style_axes(ax):
    # Light frame and grid: the data carry the ink.
    for side in ("top", "right"):
        ax.spines[side].set_visible(False)
    ax.tick_params(labelsize=9)


def _series_style(s):
    """Marker, line style and grey of series ``s``."""
    return _MARKERS[s % len(_MARKERS)], _LINESTYLES[s % len(_LINESTYLES)], _GREYS[s % len(_GREYS)]


def _legend_key(label, **style):
    """A legend entry that draws nothing on the axes."""
    from matplotlib.lines import Line2D

    return Line2D([], [], label=label, **style)


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
    _style_axes(ax)
    ax.axvline(0.0, color="0.5", lw=0.9, ls="--", zorder=1, gid="zero_line")
    # Series of one feature sit side by side within a band of 0.6 row heights.
    # The first series on top, as in the legend.
    offsets = ((n_series - 1) / 2 - np.arange(n_series)) * (0.6 / max(n_series, 1))
    handles = []
    for s, (name, off) in enumerate(zip(series, offsets, strict=True)):
        part = table if name is None else table.xs(name, level=0)
        marker, ls, grey = style = _series_style(s)
        _draw_coefficient_series(ax, part.reindex(params), params, off, style)
        if name is not None:
            handles.append(
                _legend_key(str(name), color=grey, ls=ls, marker=marker, markeredgecolor="0.1")
            )
    key = {"color": "0.3", "marker": "o", "ls": "none", "markeredgecolor": "0.1"}
    handles.append(_legend_key(f"{level:.0%} interval excludes 0", **key))
    handles.append(_legend_key(f"{level:.0%} interval includes 0", markerfacecolor="white", **key))
    ax.set_yticks(np.arange(n_rows)[::-1], [axis_label(p) for p in params])
    ax.set_ylim(-0.7, n_rows - 0.3)
    ax.autoscale(enable=True, axis="x")
    ax.margins(x=0.08)
    ax.grid(axis="x", color="0.9", lw=0.8)
    ax.set_axisbelow(True)
    ax.set_xlabel(xlabel)
    ax.set_title(
        title or f"Coefficients: posterior mean and {level:.0%} credible interval",
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
    _style_axes(ax)
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
                label=f"{level:.0%} credible interval of P contains 0.5",
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
            _legend_key(
                f"boundaries of {len(draw_lines)} posterior draws", color="0.35", lw=0.8, alpha=0.7
            )
        )
    ax.contour(grid_x, grid_y, grid_prob, levels=[0.5], colors=["0.0"], linewidths=2.2, zorder=4)
    handles.append(_legend_key("P = 0.5 (predicted probability)", color="0.0", lw=2.2))
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
            _legend_key(
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


def _wilson(hits, n, level=0.95):
    """Wilson score interval for a binomial proportion (NaN where n = 0)."""
    z = norm.ppf(0.5 + level / 2.0)
    n = np.asarray(n, dtype=float)
    with np.errstate(divide="ignore", invalid="ignore"):
        p = hits / n
        centre = (p + z**2 / (2 * n)) / (1 + z**2 / n)
        half = z * np.sqrt(p * (1 - p) / n + z**2 / (4 * n**2)) / (1 + z**2 / n)
    return centre - half, centre + half


def calibration_figure(table, *, xlabel, scores=None, title=None):
    """Reliability diagram over a histogram of the predicted probabilities.

    Parameters
    ----------
    table : pandas.DataFrame
        The accessor's reliability table: ``bin_lower``, ``bin_upper``,
        ``count``, ``mean_predicted``, ``observed_frequency``, and for
        several series a ``class`` column (one series per class).
    xlabel : str
    scores : dict, optional
        Summary numbers printed in the corner, name -> float.
    title : str, optional

    Returns
    -------
    matplotlib.figure.Figure
        Two Axes: the reliability curve(s) (Line2D with
        ``gid="reliability"``; for a single series with 95 % Wilson intervals
        for the observed frequency of each bin) above the bin counts.
    """
    Figure = require_matplotlib()

    fig = Figure(figsize=(6.0, 7.0), layout="constrained")
    ax, hist = fig.subplots(2, 1, sharex=True, height_ratios=(3, 1))
    for a in (ax, hist):
        _style_axes(a)
    # Thin, light and solid: no series uses that style.
    ax.plot([0, 1], [0, 1], color="0.7", ls="-", lw=0.9, label="perfect calibration")
    groups = [(None, table)] if "class" not in table else list(table.groupby("class", sort=False))
    n_groups = len(groups)
    width = 1.0 / max(len(table) / n_groups, 1) / n_groups
    for s, (name, part) in enumerate(groups):
        marker, ls, grey = _series_style(s)
        full = part[part["count"] > 0]
        count = full["count"].to_numpy(dtype=float)
        obs = full["observed_frequency"].to_numpy(dtype=float)
        lo, hi = _wilson(obs * count, count)
        pred = full["mean_predicted"].to_numpy(dtype=float)
        if n_groups == 1:
            # Several overlapping sets of bars would hide the curves.
            ax.errorbar(
                pred,
                obs,
                # Clipped at 0: rounding can put a Wilson bound a hair past p.
                yerr=[np.maximum(obs - lo, 0.0), np.maximum(hi - obs, 0.0)],
                fmt="none",
                ecolor=grey,
                elinewidth=0.9,
                capsize=2.5,
                alpha=0.8,
            )
        label = "observed frequency" if name is None else str(name)
        ax.plot(
            pred,
            obs,
            marker=marker,
            ls=ls,
            color=grey,
            markeredgecolor="0.1",
            markerfacecolor=grey if s % 2 == 0 else "white",
            lw=1.4,
            label=label,
            gid="reliability",
        )
        left = part["bin_lower"].to_numpy(dtype=float) + s * width
        hist.bar(
            left,
            part["count"].to_numpy(dtype=float),
            width=width,
            align="edge",
            # Light fills: the histogram is context, the curve is the message.
            color=("0.78", "white", "0.55", "white")[s % 4],
            edgecolor="0.2",
            lw=0.6,
            hatch=None if s % 2 == 0 else "///",
            label=label,
        )
    ax.set_xlim(0, 1)
    ax.set_ylim(-0.02, 1.02)
    ax.set_ylabel("observed frequency (share of rows in the bin)")
    ax.grid(color="0.92", lw=0.8)
    ax.set_axisbelow(True)
    ax.legend(fontsize=8, frameon=False, loc="upper left")
    if scores:
        text = "\n".join(f"{k}: {v:.3f}" for k, v in scores.items())
        ax.text(
            0.98,
            0.03,
            text,
            transform=ax.transAxes,
            ha="right",
            va="bottom",
            fontsize=8,
            family="monospace",
            bbox={"facecolor": "white", "edgecolor": "0.8"},
        )
    hist.set_xlabel(xlabel)
    hist.set_ylabel("rows")
    if n_groups > 1:
        hist.legend(fontsize=7, frameon=False, loc="upper right")
    ax.set_title(
        title or "Calibration: predicted probability vs observed frequency",
        fontsize=10,
        loc="left",
    )
    return fig
