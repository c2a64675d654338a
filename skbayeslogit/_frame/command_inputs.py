"""Checks of the command line's inputs, each failing with one line that names the option.

Everything here runs before any computation, so a mistyped option costs
nothing: the input file is read (and hashed for the run's manifest), and the
options are checked against each other and against the file's columns.
"""

import hashlib
import math
from pathlib import Path


class CommandError(Exception):
    """A problem with the user's input, reported as one line."""


def read_input(path, sep=None, decimal=None):
    """The CSV file at ``path`` read by :func:`~skbayeslogit._frame.reading.read_table`.

    The file is checked first (a folder, a missing or empty file each get
    one line), then read with the delimiter, decimal mark and missing-value
    tokens sniffed unless ``sep`` / ``decimal`` are given.

    Returns
    -------
    ReadResult, str
        What was read and decided, and the SHA-256 of the file's bytes.
    """
    from .reading import read_table

    path = Path(path)
    if path.is_dir():
        raise CommandError(f"{path} is a folder, not a CSV file")
    if not path.exists():
        raise CommandError(f"file not found: {path}")
    if not path.is_file():
        raise CommandError(f"{path} is not a regular file (a device or a pipe?); give a CSV file")
    try:
        data = path.read_bytes()
    except OSError as exc:
        raise CommandError(f"cannot read {path}: {exc.strerror or exc}") from exc
    if not data.strip():
        raise CommandError(f"cannot read {path} as CSV: the file is empty")
    read = read_table(path, sep=sep, decimal=decimal)
    if len(read.frame) == 0:
        # Otherwise every column reads as text and the error blames the dtypes.
        raise CommandError(f"{path} has a header but no data rows")
    return read, hashlib.sha256(data).hexdigest()


def column_names(given, option, columns):
    """Column names from a repeatable option; None when the option was not given.

    Each occurrence that is exactly a column name is taken whole (so names
    holding commas can be given one per occurrence); any other occurrence
    is split on commas.
    """
    if given is None:
        return None
    names = []
    for text in [given] if isinstance(given, str) else given:
        names += [text] if text in columns else split_names(text, option)
    repeated = sorted({n for n in names if names.count(n) > 1})
    if repeated:
        raise CommandError(f"{option} names {', '.join(repeated)} more than once")
    check_columns_named(names, option, columns)
    return names


def check_columns_named(names, option, columns):
    """Every name is one of ``columns``, or one line naming those that are not."""
    missing = [c for c in names if c not in columns]
    if missing:
        what = option.lstrip("-").removesuffix("s")
        raise CommandError(
            f"{what} column(s) not in the file: {', '.join(missing)}; "
            f"available: {', '.join(map(str, columns))}"
        )


def split_names(text, option):
    """A comma-separated option as a list of names; None when the option was not given."""
    if text is None:
        return None
    names = [t.strip() for t in text.split(",") if t.strip()]
    if not names:
        raise CommandError(f"{option} is empty ({text!r}); give comma-separated names")
    repeated = sorted({n for n in names if names.count(n) > 1})
    if repeated:
        raise CommandError(f"{option} names {', '.join(repeated)} more than once")
    return names


def check_models(names):
    """The ``--models`` list: known names only."""
    from .registry import MODELS

    unknown = [n for n in names if n not in MODELS]
    if unknown:
        raise CommandError(
            f"--models: unknown model(s) {', '.join(map(repr, unknown))}; "
            f"choose from {', '.join(MODELS)}"
        )
    return names


def check_columns(df, names, option):
    """Every name in ``names`` is a column of ``df``, or one line naming those that are not."""
    missing = [c for c in names if c not in df.columns]
    if missing:
        raise CommandError(
            f"{option} column(s) not in the file: {', '.join(missing)}; "
            f"available: {', '.join(map(str, df.columns))}"
        )


def check_level(level):
    """``--level`` strictly between 0 and 1."""
    if not 0 < level < 1:
        raise CommandError(f"--level must be between 0 and 1; got {level}")
    return level


def check_seed(seed):
    """``--seed`` in the range numpy's generators accept."""
    if not 0 <= seed < 2**32:
        raise CommandError(f"--seed must be an integer from 0 to 2**32 - 1; got {seed}")
    return seed


def check_costs(cost_fp, cost_fn):
    """``--cost-fp`` and ``--cost-fn``: both or neither, each positive and finite."""
    if (cost_fp is None) != (cost_fn is None):
        given = "--cost-fp" if cost_fn is None else "--cost-fn"
        raise CommandError(f"{given} needs its partner: give both --cost-fp and --cost-fn")
    for option, value in (("--cost-fp", cost_fp), ("--cost-fn", cost_fn)):
        if value is not None and not (math.isfinite(value) and value > 0):
            raise CommandError(f"{option} must be a positive finite number; got {value}")


def check_folds(cv):
    """``--cv`` at least 2."""
    if cv < 2:
        raise CommandError(f"--cv must be an integer >= 2 (folds of the comparison); got {cv}")
    return cv
