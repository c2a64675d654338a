"""Read a CSV export the way practitioners write them, and say what was decided.

Spreadsheets and scripts export tables in many local conventions: a
semicolon as the delimiter with a decimal comma, thousands separators,
a byte-order mark, "?" or "n/a" for missing cells, units written after the
number, the pandas index saved as a first column without a name. pandas'
reader handles each of these once told; this module finds out what to tell
it, reads the file with it, repairs the text columns that are numbers in
disguise, and records every decision in a :class:`ReadResult`.

Missing-value tokens (``MISSING_TOKENS``, compared after the reader's own
parsing, exactly and case-sensitively): the empty cell, ``?``, ``NA``,
``N/A``, ``n/a``, ``na``, ``NaN``, ``nan``, ``null``, ``NULL``, ``None``,
``-`` and ``.``. A text column that really uses one of these as a level (for
example ``NA`` for North America) must be read with ``missing_tokens=``.
"""

import csv
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np
import pandas as pd

from .errors import FrameInputError

MISSING_TOKENS = (
    "",
    "?",
    "NA",
    "N/A",
    "n/a",
    "na",
    "NaN",
    "nan",
    "null",
    "NULL",
    "None",
    "-",
    ".",
)
DELIMITERS = (",", ";", "\t", "|")
_DELIMITER_NAMES = {",": "comma", ";": "semicolon", "\t": "tab", "|": "pipe"}
_SAMPLE_CHARS = 65536
# A text column counts as "numeric-looking" when at least this share of its
# non-missing cells parse as numbers (a judgement call: one stray cell in a
# column of numbers is the case the rule is for).
NUMERIC_LOOKING_SHARE = 0.8
_UNIT = r"[^\s\d+\-.,][^\s]*"
_NUMBER = {
    ".": (r"[+-]?\d{1,3}(?:,\d{3})+(?:\.\d*)?", r"[+-]?(?:\d+\.?\d*|\.\d+)(?:[eE][+-]?\d+)?"),
    ",": (r"[+-]?\d{1,3}(?:\.\d{3})+(?:,\d*)?", r"[+-]?(?:\d+,?\d*|,\d+)(?:[eE][+-]?\d+)?"),
}


@dataclass
class ReadResult:
    """A table read from a file, and what the reader decided about it.

    Attributes
    ----------
    frame : pandas.DataFrame
        The table; numbers in disguise already converted to float64.
    path : str
    delimiter : str
        One of ``DELIMITERS`` (or what ``sep=`` gave).
    decimal : str
        ``"."`` or ``","``.
    encoding : str
        The text encoding the file was decoded with.
    index_columns : list of str
        Columns that are a saved row index (never features).
    units : dict
        Column -> the unit that followed every number in it (now stripped).
    unparsed : dict
        Column -> an example cell of numeric-looking text that did not parse.
    notes : dict
        Column -> one line about how the column was parsed.
    decisions : list of str
        One line per file-level decision (delimiter, decimal mark, encoding).
    """

    frame: pd.DataFrame
    path: str
    delimiter: str
    decimal: str
    encoding: str
    index_columns: list = field(default_factory=list)
    units: dict = field(default_factory=dict)
    unparsed: dict = field(default_factory=dict)
    notes: dict = field(default_factory=dict)
    decisions: list = field(default_factory=list)

    def summary_lines(self):
        """The decisions, then one line per column note, for a report.

        Returns
        -------
        list of str
        """
        return list(self.decisions) + [f"{c}: {n}" for c, n in self.notes.items()]


def read_table(path, *, sep=None, decimal=None, encoding=None, missing_tokens=MISSING_TOKENS):
    """Read a CSV export into a DataFrame and record what was decided.

    Parameters
    ----------
    path : str or path-like
    sep : str, optional
        The delimiter; sniffed among ``,`` ``;`` tab ``|`` when omitted.
    decimal : {".", ","}, optional
        The decimal mark. When omitted it is ``","`` only if the delimiter
        is ``;``, some text column holds numbers written with a decimal
        comma, and no column holds numbers written with a decimal point;
        otherwise ``"."``.
    encoding : str, optional
        Default: UTF-8 (a byte-order mark is dropped), falling back to
        cp1252 when the file is not valid UTF-8 (said in ``decisions``).
    missing_tokens : sequence of str
        Cells read as missing (see the module docstring).

    Returns
    -------
    ReadResult

    Raises
    ------
    FrameInputError
        Missing or empty file, no data rows, a header that names a column
        twice, an unknown ``sep`` or ``decimal``.
    """
    path = Path(path)
    if not path.is_file():
        raise FrameInputError(f"file not found: {path}")
    if decimal not in (None, ".", ","):
        raise FrameInputError(f"decimal must be '.' or ','; got {decimal!r}.")
    text_encoding, decisions = _choose_encoding(path, encoding)
    with open(path, encoding=text_encoding, newline="") as fh:
        sample = fh.read(_SAMPLE_CHARS)
    if not sample.strip():
        raise FrameInputError(f"{path} is empty.")
    if sep is None:
        sep, how = _sniff_delimiter(sample)
        decisions.append(f"delimiter: {_DELIMITER_NAMES.get(sep, repr(sep))} ({how})")
    else:
        decisions.append(f"delimiter: {_DELIMITER_NAMES.get(sep, repr(sep))} (given as sep=)")
    header = next(csv.reader([sample.splitlines()[0]], delimiter=sep))
    _check_duplicate_header(header, path)
    tokens = list(missing_tokens)
    frame = _read(path, sep, decimal or ".", text_encoding, tokens)
    if decimal is None:
        raw = _raw_reader(path, sep, text_encoding, tokens)
        decimal, line = _detect_decimal_comma(frame, sep, raw)
        decisions.append(line)
        if decimal == ",":
            frame = _read(path, sep, ",", text_encoding, tokens)
    else:
        decisions.append(f"decimal mark: {decimal!r} (given as decimal=)")
    if len(frame) == 0:
        raise FrameInputError(f"{path} has a header but no data rows.")
    result = ReadResult(frame, str(path), sep, decimal, text_encoding, decisions=decisions)
    _repair_text_columns(result)
    _find_index_columns(result, header)
    return result


def _choose_encoding(path, encoding):
    if encoding is not None:
        return encoding, [f"encoding: {encoding} (given)"]
    with open(path, "rb") as fh:
        raw = fh.read(4 * _SAMPLE_CHARS)
    bom = raw.startswith(b"\xef\xbb\xbf")
    try:
        raw.decode("utf-8")
    except UnicodeDecodeError as exc:
        # A cut inside a multi-byte character at the end of the sample is not an error.
        if exc.start < len(raw) - 3:
            return "cp1252", ["encoding: cp1252 (the file is not valid UTF-8)"]
    return "utf-8-sig", ["encoding: UTF-8" + (" (byte-order mark dropped)" if bom else "")]


def _read(path, sep, decimal, encoding, tokens):
    try:
        return pd.read_csv(
            path,
            sep=sep,
            decimal=decimal,
            encoding=encoding,
            na_values=tokens,
            keep_default_na=False,
            skipinitialspace=True,
        )
    except (pd.errors.ParserError, pd.errors.EmptyDataError) as exc:
        first = str(exc).strip().splitlines()[0] if str(exc).strip() else type(exc).__name__
        raise FrameInputError(f"cannot read {path} as CSV: {first}") from exc


def _sniff_delimiter(sample):
    """The candidate that splits the first lines into equally many fields (most wins).

    Returns
    -------
    delimiter : str
    how : str
        A short statement of why.
    """
    lines = [ln for ln in sample.splitlines()[:50] if ln.strip()]
    if len(lines) > 1 and not sample.endswith(("\n", "\r")):
        lines = lines[:-1]  # the sample may end in the middle of a row
    best, best_fields = None, 1
    for cand in DELIMITERS:
        counts = {len(row) for row in csv.reader(lines, delimiter=cand)}
        if len(counts) == 1 and (n := counts.pop()) > best_fields:
            best, best_fields = cand, n
    if best is not None:
        return best, f"every one of the first {len(lines)} lines splits into {best_fields} fields"
    try:
        found = csv.Sniffer().sniff(sample, delimiters="".join(DELIMITERS)).delimiter
        return found, "guessed by csv.Sniffer; rows have unequal field counts"
    except csv.Error:
        return ",", "no candidate splits the lines evenly; comma assumed"


def _check_duplicate_header(header, path):
    seen = {}
    for pos, name in enumerate(header):
        seen.setdefault(name.strip(), []).append(pos + 1)
    dups = {n: p for n, p in seen.items() if len(p) > 1 and n}
    if dups:
        parts = "; ".join(f"{n!r} at positions {', '.join(map(str, p))}" for n, p in dups.items())
        first = next(iter(dups))
        raise FrameInputError(
            f"the header of {path} names a column more than once ({parts}); pandas would "
            f"rename the copies (for example {first + '.1'!r}): rename or remove them."
        )


def _raw_reader(path, sep, encoding, tokens):
    """A function reading some columns of the file as text, untouched by number parsing."""

    def read(columns):
        return pd.read_csv(
            path,
            sep=sep,
            encoding=encoding,
            usecols=list(columns),
            dtype=str,
            na_values=tokens,
            keep_default_na=False,
            skipinitialspace=True,
        )

    return read


def _detect_decimal_comma(frame, sep, raw):
    if sep != ";":
        return ".", "decimal mark: '.' (the delimiter is not ';')"
    comma_cols = [c for c in frame.columns if _is_text(frame[c]) and _all_comma_numbers(frame[c])]
    if not comma_cols:
        return ".", "decimal mark: '.' (no column of numbers written with a decimal comma)"
    # "1.065" read with a decimal point may be 1065 with a thousands point:
    # only cells that no thousands grouping explains count against the comma.
    floats = [c for c in frame.columns if pd.api.types.is_float_dtype(frame[c].dtype)]
    point_cols = []
    if floats:
        text = raw(floats)
        grouped = r"[+-]?\d{1,3}(?:\.\d{3})+|[+-]?\d+"
        point_cols = [c for c in floats if not text[c].dropna().str.fullmatch(grouped).all()]
    if point_cols:
        return ".", (
            f"decimal mark: '.' kept although {', '.join(map(str, comma_cols))} use a decimal "
            f"comma, because {', '.join(map(str, point_cols))} use a decimal point; pass "
            "decimal=',' to read them with a comma"
        )
    example = frame[comma_cols[0]].dropna().astype(str).iloc[0]
    return ",", (
        f"decimal mark: ',' (detected: ';' delimiter and numbers such as {example!r} in "
        f"{', '.join(map(str, comma_cols))})"
    )


def _all_comma_numbers(col):
    values = pd.Series(col.dropna().astype(str).str.strip().unique())
    if values.empty or not values.str.contains(",", regex=False).any():
        return False
    grouped, plain = _NUMBER[","]
    return bool(values.str.fullmatch(f"(?:{grouped}|{plain})").all())


def _is_text(col):
    return pd.api.types.is_string_dtype(col.dtype) or col.dtype == object


def parse_number_text(col, decimal=".", factorized=None):
    """Try to read a text column as numbers (thousands separators, one shared unit).

    The patterns are matched once per distinct cell, not per row.

    Parameters
    ----------
    col : pandas.Series
        Text cells; missing cells stay missing.
    decimal : {".", ","}
    factorized : tuple (codes, uniques), optional
        ``pandas.factorize(col)`` when the caller has it already.

    Returns
    -------
    values : ndarray of float64 or None
        The numbers, or None when the column is not read as numbers.
    unit : str
        The unit every number carried ("" if none).
    reason : str
        Why the column was (or was not) converted; "" when it is not
        numeric-looking text at all.
    example : str or None
        A cell that did not parse, for a numeric-looking column left as text.
    """
    codes, uniques = pd.factorize(col) if factorized is None else factorized
    if len(uniques) == 0:
        return None, "", "", None
    counts = np.bincount(codes[codes >= 0], minlength=len(uniques))
    distinct = pd.Series(np.asarray(uniques, dtype=object)).astype(str).str.strip()
    grouped, plain = _NUMBER[decimal]
    parts = distinct.str.extract(f"^(?P<num>{grouped}|{plain})\\s*(?P<unit>{_UNIT})?$")
    ok = parts["num"].notna().to_numpy()
    if not ok.all():
        bad = distinct[~ok].iloc[0]
        other = "," if decimal == "." else "."
        if distinct.str.fullmatch("(?:{}|{})".format(*_NUMBER[other])).all():
            return None, "", f"numbers such as {bad!r} need decimal={other!r}", bad
        if counts[ok].sum() >= NUMERIC_LOOKING_SHARE * counts.sum():
            return None, "", f"numeric-looking text; the cell {bad!r} is not a number", bad
        return None, "", "", None
    units = sorted(set(parts["unit"].fillna("")))
    if len(units) > 1:
        shown = ", ".join(repr(u) for u in units)
        return None, "", f"numbers with different units ({shown}); left as text", None
    numbers = parts["num"]
    if decimal == ",":
        numbers = numbers.str.replace(".", "", regex=False).str.replace(",", ".", regex=False)
    else:
        numbers = numbers.str.replace(",", "", regex=False)
    table = np.append(numbers.to_numpy(dtype=np.float64), np.nan)
    values = table[codes]  # code -1 (missing) picks the trailing NaN
    sep = "'.'" if decimal == "," else "','"
    grouped_used = distinct.str.fullmatch(grouped).any()
    how = [f"unit {units[0]!r} stripped"] if units[0] else []
    how += [f"thousands separator {sep} removed"] if grouped_used else []
    return values, units[0], "read as numbers" + (f" ({'; '.join(how)})" if how else ""), None


def _repair_text_columns(result):
    frame = result.frame
    repaired = {}
    for name in frame.columns:
        col = frame[name]
        if not _is_text(col):
            continue
        values, unit, reason, example = parse_number_text(col, result.decimal)
        if values is not None:
            repaired[name] = values
        if unit:
            result.units[name] = unit
        if example is not None:
            result.unparsed[name] = example
        if reason:
            result.notes[name] = reason
    if repaired:
        result.frame = frame.assign(**{str(k): v for k, v in repaired.items()})


def _find_index_columns(result, header):
    frame = result.frame
    if not len(frame.columns) or header[0].strip():
        return
    first = frame.columns[0]
    values = frame[first]
    n = len(values)
    how = "values not a row count"
    if pd.api.types.is_integer_dtype(values.dtype):
        v = values.to_numpy()
        if np.array_equal(v, np.arange(n)) or np.array_equal(v, np.arange(1, n + 1)):
            how = f"values {v[0]}..{v[-1]} in file order"
        elif np.array_equal(np.sort(v), np.arange(v.min(), v.min() + n)):
            how = "a permutation of the row numbers: the file was sorted after indexing"
    result.index_columns.append(first)
    result.notes[first] = f"saved row index (first column without a name; {how})"
