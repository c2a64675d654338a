"""Messages that name the problem: bad command lines fail in one line naming the option
or column, before any computation; the seed reaches every random draw."""

import os
import re
import warnings

import numpy as np
import pandas as pd
import pytest
from cli_checks import one_error_line

import skbayeslogit.report
from skbayeslogit.datasets import make_orchard_lots
from skbayeslogit.report import build_report

LOTS = make_orchard_lots(60, random_state=8)
THREE = LOTS.assign(
    grade3=pd.cut(LOTS["soluble_solids_brix"], 3, labels=["low", "mid", "high"]).astype(str)
)
HALF = len(LOTS) // 2


def _gappy():
    frame = LOTS.copy()
    frame.loc[: HALF - 1, "firmness_n"] = np.nan
    frame.loc[HALF:, "starch_index"] = np.nan
    return frame


# (case, the data file: a frame, "folder" or "fifo", options, the error's pattern)
REPORT_ERRORS = [
    ("empty --models", LOTS, ["--models", ""], r"--models is empty \(''\)"),
    ("only commas in --models", LOTS, ["--models", ",,"], "--models is empty"),
    ("repeated model", LOTS, ["--models", "laplace,laplace"], "--models names laplace more than"),
    ("unknown model", LOTS, ["--models", "laplace,lasso"],
     "unknown model.*'lasso'; choose from laplace"),
    ("probit on three classes", THREE, ["--models", "probit", "--target", "grade3"],
     r"probit is binary-only and the target 'grade3' has 3 classes; try --models laplace"),
    ("data file is a folder", "folder", [], "is a folder, not a CSV file"),
    ("data file is a pipe", "fifo", [], "not a regular file"),
    ("all-missing column with --dropna", LOTS.assign(empty=np.nan),
     ["--dropna", "--features", "firmness_n,empty"], r"'empty' cannot be used: all values"),
    ("every row has a gap, --dropna", _gappy(), ["--dropna", "--features",
     "firmness_n,starch_index"], rf"every one of the {len(LOTS)} rows.*firmness_n \({HALF}\)"),
    ("negative seed", LOTS, ["--seed", "-1"], r"--seed must be an integer from 0 to 2\*\*32 - 1"),
    ("seed too large", LOTS, ["--seed", str(2**32)], "--seed must be"),
    ("empty --features", LOTS, ["--features", ""], "--features is empty"),
    ("repeated feature", LOTS, ["--features", "firmness_n,firmness_n"],
     "--features names firmness_n more than once"),
    ("unknown feature", LOTS, ["--features", "firmness_n,firmnes"],
     "feature column.*not in the file: firmnes"),
    ("one cost only", LOTS, ["--cost-fp", "1"], "--cost-fp needs its partner"),
    ("zero cost", LOTS, ["--cost-fp", "1", "--cost-fn", "0"], "--cost-fn must be a positive"),
    ("infinite cost", LOTS, ["--cost-fp", "inf", "--cost-fn", "1"], "--cost-fp must be"),
    ("one fold", LOTS, ["--cv", "1"], "--cv must be an integer >= 2"),
    ("level 0", LOTS, ["--level", "0"], "--level must be between 0 and 1"),
    ("level nan", LOTS, ["--level", "nan"], "--level must be between 0 and 1"),
    ("empty target", LOTS, ["--target", ""], "--target is required"),
]  # fmt: skip

# The cases whose checks need no computation: build_report must not even start.
BEFORE_WORK = {c[0] for c in REPORT_ERRORS} - {
    "probit on three classes",
    "all-missing column with --dropna",
    "every row has a gap, --dropna",
}


_one_line = one_error_line


def _data_path(tmp_path, data):
    path = tmp_path / "data.csv"
    if isinstance(data, pd.DataFrame):
        data.to_csv(path, index=False)
    elif data == "folder":
        path.mkdir()
    else:
        os.mkfifo(path)
    return path


@pytest.mark.parametrize(
    ("case", "data", "options", "match"), REPORT_ERRORS, ids=[c[0] for c in REPORT_ERRORS]
)
def test_report_errors_name_the_problem(tmp_path, capsys, monkeypatch, case, data, options,
                                        match):  # fmt: skip
    if case in BEFORE_WORK:

        def refuse(*args, **kwargs):
            raise AssertionError("computed before the options were checked")

        monkeypatch.setattr(skbayeslogit.report, "build_report", refuse)
    path = _data_path(tmp_path, data)
    args = ["report", str(path), "--target", "storage_grade", "--cv", "2", "--quiet", *options]
    # The last --target wins (argparse), so a case may name its own.
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        line = _one_line(capsys, args)
    assert re.search(match, line), line


SCORE_ERRORS = [
    ("model file is a folder", "model_folder", "rows", [], "is a folder; name a model_"),
    ("rows file is a folder", "model", "folder", [], "is a folder, not a CSV file"),
    ("level 1", "model", "rows", ["--level", "1"], "--level must be between 0 and 1"),
    ("model file missing", "missing", "rows", [], "model file not found"),
]


@pytest.mark.parametrize(
    ("case", "model", "rows", "options", "match"), SCORE_ERRORS, ids=[c[0] for c in SCORE_ERRORS]
)
def test_score_errors_name_the_problem(tmp_path, capsys, case, model, rows, options, match):
    model_path = tmp_path / "model_laplace.skops"
    if model == "model_folder":
        model_path.mkdir()
    elif model == "model":
        model_path.write_bytes(b"PK\x03\x04")  # the checks named here come first
    rows_path = _data_path(tmp_path, LOTS if rows == "rows" else rows)
    line = _one_line(capsys, ["score", str(model_path), str(rows_path), *options])
    assert re.search(match, line), line


def _report(seed):
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        return build_report(THREE, "grade3", features=["firmness_n", "starch_index"],
                            models=["laplace", "tempered"], cv=2, random_state=seed)  # fmt: skip


def test_the_seed_reaches_every_random_draw():
    """Two runs with one seed give identical multiclass bounds (from posterior
    draws); without the seed reaching the models they differed by ~1e-2."""
    first, again = _report(5), _report(5)
    pd.testing.assert_frame_equal(first.predictions, again.predictions, check_exact=True)
    bounds = first.predictions.filter(regex="_(lower|upper)$")
    assert bounds.shape[1] == 6  # three classes, two bounds each: draws were used
    laplace = first.models["laplace"]
    assert getattr(laplace, "estimator_", laplace).random_state == 5
