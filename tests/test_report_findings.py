"""The report's findings: the summary, the multiclass confusion, every row's
predictions with their file lines, and text a reader can trust.

References: the orchard demo's documented ground truth
(``skbayeslogit.datasets``: the true standardised coefficients in
``df.attrs``), scikit-learn's wine data with ``sklearn.metrics``
(``confusion_matrix``, ``accuracy_score``, ``precision_recall_fscore_support``),
``sklearn.model_selection.StratifiedKFold`` for the out-of-fold
probabilities, and the lines of the CSV file itself.
"""

import re
import warnings

import numpy as np
import pandas as pd
import pytest
from sklearn.datasets import load_wine
from sklearn.metrics import accuracy_score, confusion_matrix, precision_recall_fscore_support
from sklearn.model_selection import StratifiedKFold

from skbayeslogit._frame.reading import read_table
from skbayeslogit._frame.summary import (
    approximation_sentence,
    calibration_check,
    strongest_columns,
)
from skbayeslogit.datasets import TARGET, make_orchard_lots
from skbayeslogit.report import build_report, render_text
from tests.cli_checks import one_error_line

NAN = re.compile(r"\bnan\b", re.IGNORECASE)


def _quiet(*args, **kwargs):
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        return build_report(*args, **kwargs)


@pytest.fixture(scope="module")
def demo():
    df = make_orchard_lots(400, random_state=0)
    return df, _quiet(df, TARGET, models=("laplace", "tempered"), cv=3, random_state=0)


@pytest.fixture(scope="module")
def wine():
    data = load_wine(as_frame=True)
    frame = data.data.copy()
    frame["cultivar"] = np.asarray(["first", "second", "third"])[data.target]
    frame["w"] = np.random.default_rng(0).integers(1, 4, len(frame))
    return frame


# ------------------------------------------------------------------ summary


def test_summary_names_the_truths_largest_effects_with_their_direction(demo):
    """Reference: the demo's true standardised coefficients of long_storage
    (df.attrs["coef_standardised"], documented in skbayeslogit.datasets):
    the columns the summary names, in order, are the truth's largest in
    absolute value, and each direction is the truth's sign."""
    df, report = demo
    truth = df.attrs["coef_standardised"]["long_storage"]
    named = strongest_columns(report.column_evidence["laplace"])
    expected = sorted(truth, key=lambda f: -abs(truth[f]))[: len(named)]
    assert len(named) >= 3
    assert named == expected
    first = report.summary[0]
    assert [first.index(c) for c in named] == sorted(first.index(c) for c in named)
    for column in named:
        words = first[first.index(column) :].split(")")[0]
        way = "more likely" if truth[column] > 0 else "less likely"
        assert way in words, (column, words)


def test_summary_covers_every_finding(demo):
    _, report = demo
    text = " ".join(report.summary)
    for needed in ("Columns that matter", "How sure", "Best held out", "Calibration",
                   "Rows to re-check", "Approximation check"):  # fmt: skip
        assert needed in text, needed
    lines = render_text(report).splitlines()
    assert lines.index("Summary") < lines.index(
        "Model comparison (cross-validated, held-out folds)"
    )
    assert any(line.startswith("Caution:") for line in lines[:4])


def test_separated_classes_are_warned_about():
    """Reference: classes separated by construction (label = x > 0)."""
    rng = np.random.default_rng(3)
    x = rng.normal(size=80)
    frame = pd.DataFrame({"x": x, "noise": rng.normal(size=80), "y": np.where(x > 0, "b", "a")})
    report = _quiet(frame, "y", models=("laplace",), cv=2)
    assert any("separated" in s for s in report.summary)


def test_labels_unrelated_to_the_columns_are_said_to_be():
    """Reference: labels drawn independently of every column (a fair coin)."""
    rng = np.random.default_rng(4)
    frame = pd.DataFrame(rng.normal(size=(120, 3)), columns=["a", "b", "c"])
    frame["y"] = rng.choice(["no", "yes"], 120)
    summary = " ".join(_quiet(frame, "y", models=("laplace",), cv=2).summary)
    assert "No column shows substantial evidence" in summary


def test_a_prior_scale_at_the_top_of_its_search_is_warned_about(wine):
    """Reference: scikit-learn's wine data are separable (each cultivar from
    the others), so the evidence keeps rising with the prior scale."""
    report = _quiet(wine, "cultivar", models=("laplace",), cv=2)
    summary = " ".join(report.summary)
    assert "largest prior scale searched" in summary and "separated" in summary
    assert "Lindley" in summary  # column evidence is not read as 'no effect'


def test_calibration_check_tells_calibrated_from_overconfident():
    """Reference: labels drawn from known probabilities. The true ones are
    calibrated; pushed towards 0 and 1 they are overconfident."""
    rng = np.random.default_rng(1)
    p = rng.uniform(0.05, 0.95, 2000)
    codes = (rng.random(2000) < p).astype(int)
    calibrated = np.column_stack([1 - p, p])
    sharp = np.clip(p + np.sign(p - 0.5) * 0.25, 0.001, 0.999)
    overconfident = np.column_stack([1 - sharp, sharp])
    assert calibration_check(calibrated, codes, 1, 0)[1] > 0.01
    assert calibration_check(overconfident, codes, 1, 0)[1] == 0.0


def test_approximation_sentence_carries_the_verdict():
    verdict = "The fast (Laplace) posterior agrees with the exact one: Pareto k = 0.21."
    assert approximation_sentence(verdict, None) == f"Approximation check: {verdict}"
    corrected = pd.DataFrame({"estimate": [0.1]})
    warning = approximation_sentence("It does not match.", corrected)
    assert warning.startswith("Warning") and "coefficients_corrected.csv" in warning
    assert approximation_sentence(None, None) is None


def test_the_primary_models_approximation_is_checked(demo):
    _, report = demo
    check = report.approximation
    assert check is not None and 0 <= check.ess <= check.n_draws
    assert any(f"Pareto k = {check.pareto_k:.2f}" in s for s in report.summary)


# ------------------------------------------------------------------ multiclass


@pytest.mark.parametrize("weighted", [False, True])
def test_multiclass_confusion_equals_scikit_learn(wine, weighted):
    """Reference: sklearn.metrics on the argmax of the report's own model."""
    report = _quiet(wine, "cultivar", models=("laplace",), cv=2, weight="w" if weighted else None)
    model = report.models["laplace"]
    classes = list(model.classes_)
    predicted = np.asarray(classes)[np.argmax(model.predict_proba(wine), axis=1)]
    w = wine["w"].to_numpy() if weighted else None
    expected = confusion_matrix(wine["cultivar"], predicted, labels=classes, sample_weight=w)
    np.testing.assert_array_equal(report.confusion.to_numpy(), expected)
    assert report.confusion.index.tolist() == classes == report.confusion.columns.tolist()
    assert report.confusion.attrs["accuracy"] == pytest.approx(
        accuracy_score(wine["cultivar"], predicted, sample_weight=w), rel=1e-12
    )
    precision, recall, _, support = precision_recall_fscore_support(
        wine["cultivar"], predicted, labels=classes, sample_weight=w, zero_division=np.nan
    )
    np.testing.assert_allclose(report.class_rates["recall"], recall, rtol=1e-12)
    np.testing.assert_allclose(report.class_rates["precision"], precision, rtol=1e-12)
    np.testing.assert_allclose(report.class_rates["support"], support, rtol=1e-12)
    assert not NAN.search(render_text(report))
    for c in classes:  # medians of the posterior draws sit inside their bounds
        p = report.predictions
        assert (p[f"prob_{c}_lower"] <= p[f"prob_{c}_median"]).all()
        assert (p[f"prob_{c}_median"] <= p[f"prob_{c}_upper"]).all()


# ------------------------------------------------------------------ text


@pytest.mark.parametrize(
    ("level", "label", "wrong"), [(0.975, "97.5%", "98%"), (0.995, "99.5%", "100%")]
)
def test_level_labels_are_exact(level, label, wrong):
    df = make_orchard_lots(150, random_state=2)
    text = render_text(_quiet(df, TARGET, models=("laplace",), cv=2, level=level))
    assert f"({label} intervals)" in text and f"with {label} credible bounds" in text
    assert wrong not in text


def test_text_shows_no_nan_and_no_invented_intervals(demo):
    _, report = demo
    text = render_text(report)
    assert not NAN.search(text)
    assert "Bi-tempered logistic (robust): coefficients, features standardised (point " in text


def test_top_sets_how_many_doubtful_rows_are_shown(demo, capsys):
    df, report = demo
    assert report.top == 20 and len(report.doubtful) > 20  # the table holds them all
    small = _quiet(df, TARGET, models=("laplace", "tempered"), cv=2, top=3)
    text = render_text(small)
    ids = small.doubtful["lot_id"].tolist()
    assert all(i in text for i in ids[:3]) and ids[3] not in text.split("doubtful")[-1]
    assert "--top" in one_error_line(capsys, ["report", "--top", "0", "--quiet"])


# ------------------------------------------------------------------ rows


def test_every_row_is_predicted_with_a_median_inside_its_interval(demo):
    df, report = demo
    table = report.predictions
    assert len(table) == len(df) and table["lot_id"].tolist() == df["lot_id"].tolist()
    p = "prob_long_storage"
    assert (table[f"{p}_lower"] <= table[f"{p}_median"]).all()
    assert (table[f"{p}_median"] <= table[f"{p}_upper"]).all()
    np.testing.assert_array_equal(table["line"], np.arange(1, len(df) + 1))


def test_out_of_fold_probabilities_equal_a_refit_on_each_fold(demo):
    """Reference: sklearn's StratifiedKFold with the report's folds (cv=3,
    shuffled, seed 0) and a fit through the accessor on each training part:
    the same fits on the same rows, so equal to rounding."""
    df, report = demo
    expected = np.empty(len(df))
    folds = StratifiedKFold(3, shuffle=True, random_state=0).split(df, df[TARGET])
    for train, test in folds:
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")
            model = df.iloc[train].bayeslogit.fit(TARGET, model="laplace", random_state=0)
        expected[test] = model.predict_proba(df.iloc[test])[:, 1]
    np.testing.assert_allclose(report.predictions["oof_prob_long_storage"], expected, rtol=1e-8)


def _export_with_gaps(path):
    """The demo as a CSV file with a missing cell, a blank line and a cell
    holding a line break, so row positions and file lines differ."""
    df = make_orchard_lots(80, random_state=5).head(60)
    df.loc[9, "firmness_n"] = np.nan
    df["note"] = [f"lot note {i}" for i in range(60)]
    df.loc[29, "note"] = "first line\nsecond line"
    text = df.to_csv(index=False).splitlines(keepends=True)
    # The header is line 1 and row 19 (0-based) starts on line 21; a blank
    # line goes before it.
    text.insert(20, "\n")
    path.write_text("".join(text), encoding="utf-8")
    return path


def test_line_numbers_are_the_files_lines(tmp_path):
    """Reference: the file's own lines: each row's ``line`` is the line on
    which its lot ID is written."""
    path = _export_with_gaps(tmp_path / "lots.csv")
    lines = path.read_text(encoding="utf-8").split("\n")
    read = read_table(path)
    report = _quiet(read.frame, TARGET, models=("laplace", "tempered"), cv=2, reading=read,
                    missing="drop", id=["lot_id"])  # fmt: skip
    table = report.predictions
    assert len(table) == 59 and "L0010" not in set(table["lot_id"])
    for frame in (table, report.doubtful):
        for lot, line in zip(frame["lot_id"], frame["line"], strict=True):
            assert lines[line - 1].startswith(f"{lot},"), (lot, line)
    assert table.set_index("lot_id").loc["L0031", "line"] == 34  # after the blank line and break
    ids = report.columns.loc[report.columns["role"] == "id", "column"].tolist()
    assert "lot_id" in ids  # the note column, one text per row, is taken as an ID too
    for frame in (table, report.doubtful):
        assert list(frame.columns[: len(ids) + 2]) == [*ids, "line", TARGET]


def test_multiclass_summary_names_the_classes_a_column_favours():
    """Reference: the three-class demo's true standardised coefficients
    (juice is the reference class at 0): for the two largest effects the
    summary names the class with the largest true coefficient over the one
    with the smallest."""
    from skbayeslogit._frame.fitting import coefficient_table
    from skbayeslogit._frame.summary import column_sentences

    df = make_orchard_lots(300, n_classes=3, random_state=0)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        model = df.bayeslogit.fit(TARGET, model="laplace", random_state=0)
    first = column_sentences(model.column_evidence(), coefficient_table(model, 0.9), 0.9)[0]
    truth = pd.DataFrame(df.attrs["coef_standardised"])  # features x classes
    for column in ("firmness_n", "bruise_share_pct"):
        words = first[first.index(column) :].split(")")[0]
        most, least = truth.loc[column].idxmax(), truth.loc[column].idxmin()
        assert f"favour {most} over {least}" in words, words


def test_an_unreliable_approximation_is_stated_and_corrected(tmp_path):
    """scikit-learn's breast-cancer data (30 columns, prior scale by the evidence):
    the check's Pareto k is above 0.7 (0.82 with seed 0 on 2026-12-03; the
    estimator-level test in test_approximation.py finds 1.13 at prior sd 3), so
    the summary warns and the page and the CSVs carry the corrected table."""
    from sklearn.datasets import load_breast_cancer

    from skbayeslogit.report import build_report, write_outputs

    df = load_breast_cancer(as_frame=True).frame
    df["target"] = df["target"].map({0: "malignant", 1: "benign"})
    report = build_report(df, "target", models=("laplace",), cv=2, random_state=0)
    assert not report.approximation.reliable
    corrected = report.corrected_coefficients
    assert list(corrected.index) == list(report.coefficients["laplace"].index)
    # The correction moved the means by the check's own shifts (in Laplace sd).
    laplace = report.coefficients["laplace"]
    moved = ((corrected["estimate"] - laplace["estimate"]) / laplace["sd"]).abs().max()
    assert moved == pytest.approx(np.abs(report.approximation.mean_shift).max(), rel=1e-6)
    warning = [s for s in report.summary if "approximation check" in s]
    assert warning and warning[0].startswith("Warning")
    paths = write_outputs(report, df, tmp_path / "out")
    page = next(p for p in paths["html"]).read_text(encoding="utf-8")
    assert "coefficients corrected by the approximation check" in page
    assert (tmp_path / "out" / "coefficients_corrected.csv").exists()
