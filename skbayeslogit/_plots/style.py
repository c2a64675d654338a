"""The figures' shared look: light axes, and series told apart without colour.

The look is meant to survive grey-scale print: series differ by marker,
fill and line style, never by colour alone. Nothing here imports
matplotlib at import time.
"""

# Marker, fill and line style per series: distinguishable without colour.
MARKERS = ("o", "s", "^", "D", "v", "P", "X")
LINESTYLES = ("-", "--", ":", "-.")
GREYS = ("0.1", "0.45", "0.65", "0.3", "0.55")


def require_matplotlib():
    """Import matplotlib's Figure class or say how to install it.

    Returns
    -------
    type
        :class:`matplotlib.figure.Figure`.

    Raises
    ------
    ImportError
        When matplotlib is not installed (it is a dependency of the
        package, so the installation is incomplete), naming the fix.
    """
    try:
        from matplotlib.figure import Figure
    except ImportError as exc:
        raise ImportError(
            "plotting needs matplotlib, a dependency of skbayeslogit that is not installed "
            "here; reinstall skbayeslogit, or install the plot extra: "
            'pip install "skbayeslogit[plot]"'
        ) from exc
    return Figure


def style_axes(ax):
    """Light frame: the data carry the ink."""
    for side in ("top", "right"):
        ax.spines[side].set_visible(False)
    ax.tick_params(labelsize=9)


def series_style(s):
    """Marker, line style and grey of series ``s``."""
    return MARKERS[s % len(MARKERS)], LINESTYLES[s % len(LINESTYLES)], GREYS[s % len(GREYS)]


def legend_key(label, **style):
    """A legend entry that draws nothing on the axes."""
    from matplotlib.lines import Line2D

    return Line2D([], [], label=label, **style)
