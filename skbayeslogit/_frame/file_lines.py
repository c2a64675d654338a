"""Where each row of a table came from: its line in the file, or its place in the frame.

Row-level outputs (the doubtful list, the predictions) carry a ``line``
column so that a reader can find a row in the file they exported: the line
on which the row starts, the header being line 1 (so the first data row of
a plain export is line 2). A quoted cell holding line breaks makes a row
span several lines, and blank lines are skipped, as the reader does. For a
DataFrame given without a file, ``line`` is the row's 1-based position in
that frame.
"""

import csv

import numpy as np
import pandas as pd


def record_start_lines(path, delimiter, encoding):
    """The line on which each data record of a CSV file starts (header = line 1).

    Parameters
    ----------
    path : str or path-like
    delimiter : str
    encoding : str

    Returns
    -------
    ndarray of int64
        One entry per non-blank record after the header.
    """
    starts = []
    with open(path, encoding=encoding, newline="") as fh:
        reader = csv.reader(fh, delimiter=delimiter)
        before = 0
        for record in reader:
            if record:  # a blank line is no record (pandas skips it too)
                starts.append(before + 1)
            before = reader.line_num
    return np.asarray(starts[1:], dtype=np.int64)


def row_lines(df, reading=None):
    """Each row's line number, aligned with ``df``, and a note when it is not the file's.

    Parameters
    ----------
    df : pandas.DataFrame
        The table as read (before any row is left out).
    reading : ReadResult, optional
        How ``df`` was read from a file; None for a DataFrame given directly.

    Returns
    -------
    lines : pandas.Series of int64
    note : str or None
        Why the numbers are row positions although a file was read.
    """
    positions = pd.Series(np.arange(1, len(df) + 1, dtype=np.int64), index=df.index)
    if reading is None:
        return positions, None
    try:
        starts = record_start_lines(reading.path, reading.delimiter, reading.encoding)
    except (OSError, UnicodeDecodeError, csv.Error) as exc:
        return positions, f"line numbers are row positions: the file could not be re-read ({exc})."
    if len(starts) != len(df):
        return positions, (
            f"line numbers are row positions: the file has {len(starts)} records but "
            f"{len(df)} rows were read."
        )
    return pd.Series(starts, index=df.index), None
