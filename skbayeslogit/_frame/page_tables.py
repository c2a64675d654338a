"""Tables as the report page shows them: a few key columns on screen, the rest folded.

Every table goes through :func:`~skbayeslogit._frame.formatting.format_frame`
(significant digits, integers whole) and pandas' ``Styler`` (escaped cells,
a class per column kind for the style sheet). A table wider than
``SHOWN_COLUMNS`` shows its key columns; the others go into a second table
behind a ``<details>`` element of the template.
"""

import pandas as pd
from markupsafe import Markup
from pandas.io.formats.style import Styler

from .formatting import format_frame

# A 1280-pixel page holds about six columns of numbers with their labels.
SHOWN_COLUMNS = 6


def _is_number(column):
    return pd.api.types.is_numeric_dtype(column) and not pd.api.types.is_bool_dtype(column)


def styled(frame, key, *, show_index=True):
    """``frame`` as an HTML table (safe markup), its numbers with significant digits.

    ``key`` names the table (the id of its element). Numeric columns get
    the class ``num`` (right-aligned), the others ``text``.
    """
    shown = format_frame(frame)
    kinds = ["num" if _is_number(frame[c]) else "text" for c in frame.columns]
    classes = pd.DataFrame([kinds] * len(frame), index=shown.index, columns=shown.columns)
    styler = Styler(shown, uuid=key, cell_ids=False)
    styler = styler.format(escape="html").format_index(escape="html", axis=1)
    styler = styler.format_index(escape="html", axis=0).set_td_classes(classes)
    if not show_index:
        styler = styler.hide(axis="index")
    return Markup(styler.to_html(table_attributes='class="data"'))


def table(frame, key, *, shown=None, caption=None, note=None, show_index=True, folded=None):
    """One table of the page: key columns on screen, the others behind ``<details>``.

    Parameters
    ----------
    frame : pandas.DataFrame
    key : str
        Names the table (element ids).
    shown : list of str, optional
        The columns to show on screen when ``frame`` has more than
        ``SHOWN_COLUMNS`` (those absent from ``frame`` are skipped);
        default the first ``SHOWN_COLUMNS``.
    caption, note : str, optional
        A line above the table, and one below it.
    show_index : bool
        Whether the row labels are shown.
    folded : str, optional
        The ``<details>`` summary line for the other columns.

    Returns
    -------
    dict
        ``html``, ``more`` (the other columns' table or None), ``more_label``,
        ``caption``, ``note``: what the template's table macro reads.
    """
    columns = [str(c) for c in frame.columns]
    keep = columns[:SHOWN_COLUMNS]
    if shown is not None and len(columns) > SHOWN_COLUMNS:
        keep = [c for c in shown if c in columns]
    rest = [c for c in columns if c not in keep]
    more = None
    if rest:
        more = styled(frame[rest], f"{key}_more", show_index=show_index)
    label = folded or f"{len(rest)} more column{'s' if len(rest) != 1 else ''}: " + ", ".join(rest)
    return {
        "html": styled(frame[keep], key, show_index=show_index),
        "more": more,
        "more_label": label,
        "caption": caption,
        "note": note,
    }


def folded_table(frame, key, *, label, caption=None, note=None, show_index=True):
    """A whole table behind ``<details>`` (a long one), with a line on screen."""
    return {
        "html": None,
        "more": styled(frame, key, show_index=show_index),
        "more_label": label,
        "caption": caption,
        "note": note,
    }


def row_labels(frame, ids):
    """``frame`` indexed by its ID columns, else its ``line`` column, else row numbers.

    Pandas' 0-based positions mean nothing to a reader: an ID (or the
    file's line number) finds the row again in the data. Without either,
    the label is the row's 1-based number in the data the report used.
    """
    present = [c for c in ids if c in frame.columns]
    if present:
        return frame.set_index(present)
    if "line" in frame.columns:
        return frame.set_index("line")
    out = frame.copy()
    index = out.index
    if pd.api.types.is_integer_dtype(index.dtype):
        out.index = pd.Index(index + 1, name="row")
    return out
