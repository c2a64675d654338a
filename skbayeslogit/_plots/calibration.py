"""The reliability diagram: predicted probability against observed frequency, by bin.

One column of panels per binning of the table (equal-width bins, and
equal-count bins when the table holds them), each a reliability curve
above the bins' counts.
"""

import numpy as np
from scipy.stats import norm

from .._frame.formatting import significant
from .style import require_matplotlib, series_style, style_axes

BINNING_TITLES = {
    "uniform": "equal-width bins",
    "quantile": "equal-count bins (quantiles of the predictions)",
}
# Light fills: the histogram is context, the curve is the message.
_FILLS = ("0.78", "white", "0.55", "white")


def wilson(hits, n, level=0.95):
    """Wilson score interval for a binomial proportion (NaN where n = 0).

    Wilson, E. B. (1927), JASA 22, 209-212.
    """
    z = norm.ppf(0.5 + level / 2.0)
    n = np.asarray(n, dtype=float)
    with np.errstate(divide="ignore", invalid="ignore"):
        p = hits / n
        centre = (p + z**2 / (2 * n)) / (1 + z**2 / n)
        half = z * np.sqrt(p * (1 - p) / n + z**2 / (4 * n**2)) / (1 + z**2 / n)
    return centre - half, centre + half


def _sizes(part):
    """What each bin holds: the weight sum of a weighted table, else the row count."""
    column = "weight" if "weight" in part else "count"
    return part[column].to_numpy(dtype=float)


def _draw_curve(ax, part, s, n_groups, label):
    """One series' reliability curve; for a single series with Wilson intervals."""
    marker, ls, grey = series_style(s)
    full = part[part["count"] > 0]
    size = _sizes(full)
    obs = full["observed_frequency"].to_numpy(dtype=float)
    pred = full["mean_predicted"].to_numpy(dtype=float)
    if n_groups == 1:
        # Several overlapping sets of bars would hide the curves.
        lo, hi = wilson(obs * size, size)
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


def _draw_counts(hist, part, s, n_groups, binning, label):
    """The bins' counts: bars side by side (equal width) or outlines (equal count)."""
    lower = part["bin_lower"].to_numpy(dtype=float)
    upper = part["bin_upper"].to_numpy(dtype=float)
    size = _sizes(part)
    if binning == "quantile":
        # Equal counts say nothing drawn as heights: the density (rows per
        # 0.1 of probability) shows where the bins lie and how narrow they
        # are. Each series has its own edges, so outlines, not bars.
        _, ls, grey = series_style(s)
        edges = np.append(lower, upper[-1:])
        density = size * 0.1 / np.maximum(upper - lower, np.finfo(float).tiny)
        fill = n_groups == 1
        hist.stairs(density, edges, fill=fill, color="0.78" if fill else grey, ls=ls, label=label)
        if fill:
            hist.stairs(density, edges, color="0.2", lw=0.6)
        return
    width = (upper - lower) / n_groups
    hist.bar(
        lower + s * width,
        size,
        width=width,
        align="edge",
        color=_FILLS[s % 4],
        edgecolor="0.2",
        lw=0.6,
        hatch=None if s % 2 == 0 else "///",
        label=label,
    )


def _scores_box(ax, scores):
    text = "\n".join(f"{k}: {significant(v)}" for k, v in scores.items())
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


def calibration_figure(table, *, xlabel, scores=None, title=None):
    """Reliability diagram over a histogram of the predicted probabilities.

    Parameters
    ----------
    table : pandas.DataFrame
        The accessor's reliability table: ``bin_lower``, ``bin_upper``,
        ``count``, ``mean_predicted``, ``observed_frequency``; optionally
        ``weight`` (the bins' weight sums: the histogram and the intervals
        use them), ``binning`` ("uniform" and/or "quantile": one column of
        panels each) and ``class`` (one series per class).
    xlabel : str
    scores : dict, optional
        Summary numbers printed in the corner, name -> float.
    title : str, optional

    Returns
    -------
    matplotlib.figure.Figure
        Two Axes per binning, the reliability curve(s) (Line2D with
        ``gid="reliability"``; for a single series with 95 % Wilson intervals
        for the observed frequency of each bin) above the bin counts, in the
        order curve, counts, curve, counts.
    """
    Figure = require_matplotlib()

    binnings = list(dict.fromkeys(table["binning"])) if "binning" in table else ["uniform"]
    fig = Figure(figsize=(5.4 * len(binnings), 6.6), layout="constrained")
    grid = fig.subplots(2, len(binnings), sharex=True, height_ratios=(3, 1), squeeze=False)
    weighted = "weight" in table
    for b, binning in enumerate(binnings):
        ax, hist = grid[0, b], grid[1, b]
        for a in (ax, hist):
            style_axes(a)
        part_b = table if "binning" not in table else table[table["binning"] == binning]
        # Thin, light and solid: no series uses that style.
        ax.plot([0, 1], [0, 1], color="0.7", ls="-", lw=0.9, label="perfect calibration")
        groups = [(None, part_b)]
        if "class" in part_b:
            groups = list(part_b.groupby("class", sort=False))
        for s, (name, part) in enumerate(groups):
            label = "observed frequency" if name is None else str(name)
            _draw_curve(ax, part, s, len(groups), label)
            _draw_counts(hist, part, s, len(groups), binning, label)
        ax.set_xlim(0, 1)
        ax.set_ylim(-0.02, 1.02)
        ax.grid(color="0.92", lw=0.8)
        ax.set_axisbelow(True)
        if len(binnings) > 1:
            ax.set_title(BINNING_TITLES.get(binning, binning), fontsize=9, loc="left")
        hist.set_xlabel(xlabel)
        unit = "weight" if weighted else "rows"
        if binning == "quantile":
            hist.set_ylabel(f"{unit} per 0.1 of probability", fontsize=8)
        elif b == 0:
            hist.set_ylabel(f"{unit} (rows x weight)" if weighted else unit)
        if b == 0:
            ax.set_ylabel("observed frequency (share of rows in the bin)")
            ax.legend(fontsize=8, frameon=False, loc="upper left")
            if scores:
                _scores_box(ax, scores)
            if len(groups) > 1:
                hist.legend(fontsize=7, frameon=False, loc="upper right")
    heading = title or "Calibration: predicted probability vs observed frequency"
    if len(binnings) > 1:
        fig.suptitle(heading, fontsize=10, x=0.01, ha="left")
    else:
        grid[0, 0].set_title(heading, fontsize=10, loc="left")
    return fig
