"""The command line's front door (issue 18): a real export, read and given column roles.

The data are scikit-learn's copy of the Wisconsin diagnostic breast-cancer
table (``sklearn.datasets.load_breast_cancer``), exported the way
spreadsheets in many locales write it: semicolons, decimal commas, a "?"
for a missing cell, plus the columns such exports carry (a numeric patient
number, a text clinic column). The references are the same rows held in
memory as scikit-learn ships them, fitted through the accessor.
"""

import numpy as np
import pandas as pd
import pytest
from sklearn.datasets import load_breast_cancer

import skbayeslogit.accessor  # noqa: F401  (registers df.bayeslogit)
from skbayeslogit.cli import main

FEATURES = ["mean radius", "mean texture", "mean smoothness", "mean compactness"]
GAP_ROW = 3
FAST = ["--models", "laplace", "--cv", "2", "--quiet"]


def _table():
    data = load_breast_cancer(as_frame=True)
    frame = pd.DataFrame({"patient_id": np.arange(100001, 100001 + len(data.target))})
    frame[FEATURES] = data.data[FEATURES].to_numpy()
    frame["clinic"] = np.random.default_rng(0).choice(["north", "south", "east"], len(frame))
    frame["diagnosis"] = np.where(data.target == 0, "malignant", "benign")
    return frame


def _export(frame, path):
    """Semicolons, decimal commas and a '?' where a value is missing."""
    text = frame.astype(object)
    for col in FEATURES:
        text[col] = [repr(float(v)).replace(".", ",") for v in frame[col]]
    text.loc[GAP_ROW, "mean texture"] = "?"
    text.to_csv(path, sep=";", index=False)
    return path


@pytest.fixture(scope="module")
def export(tmp_path_factory):
    return _export(_table(), tmp_path_factory.mktemp("export") / "cancer.csv")


@pytest.fixture(scope="module")
def run(export, tmp_path_factory):
    out = tmp_path_factory.mktemp("run") / "out"
    code = main(["report", str(export), "--target", "diagnosis", "--id", "patient_id",
                 "--missing", "drop", *FAST, "--out", str(out)])  # fmt: skip
    assert code == 0
    return out


def test_the_export_is_read_and_every_column_gets_a_role(run):
    roles = pd.read_csv(run / "columns.csv").set_index("column")
    assert roles.loc["patient_id", "role"] == "id"
    assert roles.loc["diagnosis", "role"] == "target"
    assert roles.loc["clinic", ["role", "kind"]].tolist() == ["feature", "categorical"]
    assert (roles.loc[FEATURES, "role"] == "feature").all()
    assert roles.loc["mean texture", "missing"] == 1  # the "?" cell
    coefs = pd.read_csv(run / "coefficients_laplace.csv", index_col=0)
    assert "patient_id" not in coefs.index
    assert {"clinic=east", "clinic=north", "clinic=south"} <= set(coefs.index)
    html = (run / "report.html").read_text(encoding="utf-8")
    assert "Columns: the role of each" in html and "given as id=" in html


def test_the_fit_equals_one_on_the_rows_scikit_learn_ships(run):
    """Reference: the same rows from sklearn.datasets in memory (no reading
    involved) fitted through the accessor; the file's decimal commas and the
    '?' must give the same numbers, so the coefficients agree to rounding."""
    frame = _table().drop(index=GAP_ROW)
    model = frame.bayeslogit.fit(
        "diagnosis", [*FEATURES, "clinic"], model="laplace", id="patient_id"
    )
    expected = model.coef_table(0.9)
    written = pd.read_csv(run / "coefficients_laplace.csv", index_col=0)
    np.testing.assert_allclose(
        written.loc[expected.index, "estimate"], expected["estimate"], rtol=1e-8
    )
    evidence = pd.read_csv(run / "column_evidence_laplace.csv", index_col=0)
    assert evidence.loc["clinic", "n_parameters"] == 3
    assert "patient_id" not in evidence.index


def test_row_outputs_keep_the_id(run):
    predictions = pd.read_csv(run / "predictions.csv", index_col=0)
    doubtful = pd.read_csv(run / "doubtful_labels.csv", index_col=0)
    assert predictions["patient_id"].iloc[0] == 100001
    assert doubtful["patient_id"].between(100001, 100569).all()


def test_an_id_column_is_found_by_its_name(export, capsys):
    assert main(["report", str(export), "--target", "diagnosis", "--missing", "drop",
                 *FAST]) == 0  # fmt: skip
    text = capsys.readouterr().out
    assert "patient_id" in text and "id (numeric): taken as an ID by its name" in text
    assert "read: decimal mark: ','" in text


def test_the_chosen_positive_class_orients_the_outputs(export, run, tmp_path):
    """Reference: the default run (positive 'malignant', the second in sorted
    order). P(benign) = 1 - P(malignant), and the bounds swap."""
    out = tmp_path / "benign"
    assert main(["report", str(export), "--target", "diagnosis", "--missing", "drop",
                 "--positive", "benign", *FAST, "--out", str(out)]) == 0  # fmt: skip
    mine = pd.read_csv(out / "predictions.csv", index_col=0)
    default = pd.read_csv(run / "predictions.csv", index_col=0)
    np.testing.assert_allclose(mine["prob_benign"], 1 - default["prob_malignant"], atol=1e-12)
    np.testing.assert_allclose(
        mine["prob_benign_lower"], 1 - default["prob_malignant_upper"], atol=1e-12
    )
    assert pd.read_csv(out / "confusion.csv", index_col=0).index.tolist() == ["benign"]


def test_a_weight_column_equals_repeated_rows(tmp_path):
    """Reference: the accessor's fit on the table with every row repeated
    its weight's number of times (weight 0: left out). Frequency weights
    give the same likelihood, hence the same evidence, prior scale and
    posterior; the tolerance is the solver's convergence."""
    frame = _table().drop(columns="clinic")
    frame["copies"] = np.random.default_rng(1).integers(0, 4, len(frame))
    path = tmp_path / "weighted.csv"
    frame.to_csv(path, index=False)
    out = tmp_path / "out"
    assert main(["report", str(path), "--target", "diagnosis", "--weight", "copies",
                 *FAST, "--out", str(out)]) == 0  # fmt: skip
    expanded = frame.loc[frame.index.repeat(frame["copies"])].drop(columns="copies")
    model = expanded.bayeslogit.fit("diagnosis", FEATURES, model="laplace")
    expected = model.coef_table(0.9)
    written = pd.read_csv(out / "coefficients_laplace.csv", index_col=0)
    roles = pd.read_csv(out / "columns.csv").set_index("column")
    assert roles.loc["copies", "role"] == "weight"
    for col in ("estimate", "sd"):
        np.testing.assert_allclose(written.loc[expected.index, col], expected[col], rtol=1e-6)


def test_features_named_one_per_option_may_hold_commas(export, tmp_path, capsys):
    frame = _table().rename(columns={"mean radius": "radius, mm"})
    path = tmp_path / "commas.csv"
    frame.to_csv(path, index=False)
    assert main(["report", str(path), "--target", "diagnosis", "--features", "radius, mm",
                 "--features", "mean texture,clinic", *FAST]) == 0  # fmt: skip
    text = capsys.readouterr().out
    assert "3 features: radius, mm, mean texture, clinic" in text


def test_dropna_contradicting_missing_is_one_line(export, capsys):
    code = main(["report", str(export), "--target", "diagnosis", "--dropna",
                 "--missing", "impute", *FAST])  # fmt: skip
    assert code == 2
    assert "--dropna means --missing drop" in capsys.readouterr().err


def test_score_keeps_ids_and_notes_rows_it_cannot_score(export, run, tmp_path, capsys):
    out = tmp_path / "scored.csv"
    assert main(["score", str(run / "model_laplace.skops"), str(export),
                 "--out", str(out), "--quiet"]) == 0  # fmt: skip
    scored = pd.read_csv(out, keep_default_na=False, na_values=[""])
    assert len(scored) == 569 and scored["patient_id"].iloc[0] == 100001
    gap = scored.iloc[GAP_ROW]
    assert np.isnan(gap["prob_malignant"]) and gap["note"] == "missing value in: mean texture"
    assert scored.drop(index=GAP_ROW)["note"].isna().all()
    assert scored.drop(index=GAP_ROW)["prob_malignant"].between(0, 1).all()
