"""Reading real exports: open data written out the way people export them, read back.

The reference for every round trip is the data set itself as it ships:
scikit-learn's breast-cancer (Wolberg, Street & Mangasarian 1995) and wine
(Forina et al., UCI) sets, and statsmodels' ``fair`` data (Fair 1978). Each
test writes a file the way a spreadsheet, R or pandas exports it, reads it
back and compares the values with the originals, then asserts the table of
column roles.
"""

import numpy as np
import pandas as pd
import pytest
import statsmodels.api as sm
from sklearn.datasets import load_breast_cancer, load_wine

from skbayeslogit._frame.errors import FrameInputError
from skbayeslogit._frame.reading import MISSING_TOKENS, read_table
from skbayeslogit._frame.roles import assign_roles

# pandas writes floats with repr and reads them with its "high" parser:
# the round trip is exact up to at most one unit in the last place.
RTOL = 1e-15


@pytest.fixture(scope="module")
def cancer():
    data = load_breast_cancer(as_frame=True)
    df = data.frame.drop(columns="target")
    return df.assign(diagnosis=np.where(data.target == 0, "malignant", "benign"))


@pytest.fixture(scope="module")
def wine():
    return load_wine(as_frame=True).frame.rename(columns={"target": "cultivar"})


def _assert_values(read, original, columns):
    for c in columns:
        np.testing.assert_allclose(read[c].to_numpy(float), original[c].to_numpy(float), rtol=RTOL)


def _roles(result):
    return result.table.set_index("column")["role"].to_dict()


def _read_roles(path, target, **kwargs):
    read = read_table(path)
    roles = assign_roles(
        read.frame, target, index_columns=read.index_columns, unparsed=read.unparsed, **kwargs
    )
    return read, roles


def test_pandas_index_saved_after_sorting_by_class(cancer, tmp_path):
    path = tmp_path / "sorted.csv"
    cancer.sort_values("diagnosis").to_csv(path)  # index=True: the leak in issue 18
    read, roles = _read_roles(path, "diagnosis")
    assert read.index_columns == ["Unnamed: 0"]
    assert "permutation" in read.notes["Unnamed: 0"]
    assert _roles(roles)["Unnamed: 0"] == "left out"
    assert roles.numeric == list(load_breast_cancer().feature_names)
    original = cancer.sort_values("diagnosis")
    _assert_values(read.frame, original, roles.numeric)


def test_index_in_file_order(cancer, tmp_path):
    path = tmp_path / "reset.csv"
    cancer.sort_values("diagnosis").reset_index(drop=True).to_csv(path)
    read = read_table(path)
    assert read.index_columns == ["Unnamed: 0"]
    assert f"0..{len(cancer) - 1} in file order" in read.notes["Unnamed: 0"]


def test_duplicate_header_is_an_error_naming_it(cancer, tmp_path):
    path = tmp_path / "dup.csv"
    cancer.assign(copy=cancer["diagnosis"]).to_csv(path, index=False)
    text = path.read_text().replace(",copy\n", ",diagnosis\n", 1)
    path.write_text(text)
    with pytest.raises(FrameInputError, match=r"'diagnosis' at positions 31, 32.*'diagnosis\.1'"):
        read_table(path)


def test_semicolon_and_decimal_comma_with_thousands_points(wine, tmp_path):
    path = tmp_path / "wine_eu.csv"
    export = wine.copy()
    # Proline (up to 1680) written with a thousands point, as European spreadsheets do.
    export["proline"] = [f"{v:,.0f}".replace(",", ".") for v in wine["proline"]]
    export.to_csv(path, sep=";", decimal=",", index=False)
    read, roles = _read_roles(path, "cultivar")
    assert (read.delimiter, read.decimal) == (";", ",")
    assert any("decimal mark: ','" in d and "detected" in d for d in read.decisions)
    assert "thousands separator '.'" in read.notes["proline"]
    _assert_values(read.frame, wine, list(wine.columns))
    assert roles.numeric == [c for c in wine.columns if c != "cultivar"]
    assert roles.classes == (0, 1, 2)


def test_decimal_comma_given(wine, tmp_path):
    path = tmp_path / "wine_eu.csv"
    wine.to_csv(path, sep=";", decimal=",", index=False)
    read = read_table(path, decimal=",")
    assert "given as decimal=" in read.decisions[-1]
    _assert_values(read.frame, wine, list(wine.columns))


def test_question_marks_and_other_missing_tokens(cancer, tmp_path):
    path = tmp_path / "gaps.csv"
    export = cancer.astype({"mean radius": object, "mean texture": object})
    export.loc[[3, 40], "mean radius"] = "?"
    export.loc[[7], "mean texture"] = "n/a"
    export.to_csv(path, index=False)
    read, roles = _read_roles(path, "diagnosis")
    assert read.frame["mean radius"].dtype == np.float64
    counts = roles.table.set_index("column")["missing"]
    assert counts["mean radius"] == 2 and counts["mean texture"] == 1
    assert _roles(roles)["mean radius"] == "feature"
    keep = ~cancer.index.isin([3, 40])
    _assert_values(read.frame[keep], cancer[keep], ["mean radius"])
    assert {"?", "", "NA", "n/a", "N/A", "null", "-", "."} <= set(MISSING_TOKENS)


def test_thousands_separator_in_a_comma_file(wine, tmp_path):
    path = tmp_path / "wine_thousands.csv"
    wine.assign(proline=[f"{v:,.0f}" for v in wine["proline"]]).to_csv(path, index=False)
    assert '"1,065"' in path.read_text()  # pandas quotes the cells that hold the delimiter
    read = read_table(path)
    assert "thousands separator ','" in read.notes["proline"]
    _assert_values(read.frame, wine, ["proline"])


def test_unit_suffix_shared_by_the_column(cancer, tmp_path):
    path = tmp_path / "units.csv"
    export = cancer.assign(**{"mean radius": [f"{v!r} mm" for v in cancer["mean radius"]]})
    export["mean area"] = [
        f"{v!r} mm2" if i % 2 else f"{v!r} cm2" for i, v in enumerate(cancer["mean area"])
    ]
    export.to_csv(path, index=False)
    read, roles = _read_roles(path, "diagnosis")
    assert read.units == {"mean radius": "mm"}
    _assert_values(read.frame, cancer, ["mean radius"])
    assert "different units" in read.notes["mean area"]
    assert _roles(roles)["mean area"] == "left out"


def test_byte_order_mark(cancer, tmp_path):
    path = tmp_path / "bom.csv"
    cancer.to_csv(path, index=False, encoding="utf-8-sig")
    assert path.read_bytes().startswith(b"\xef\xbb\xbf")
    read = read_table(path)
    assert read.frame.columns[0] == "mean radius"
    assert "byte-order mark" in read.decisions[0]


@pytest.mark.parametrize(("sep", "name"), [("\t", "tab"), ("|", "pipe"), (";", "semicolon")])
def test_sniffed_delimiters(cancer, tmp_path, sep, name):
    path = tmp_path / "sep.txt"
    cancer.to_csv(path, sep=sep, index=False)
    read = read_table(path)
    assert read.delimiter == sep and any(name in d for d in read.decisions)
    pd.testing.assert_index_equal(read.frame.columns, cancer.columns)


def test_ids_and_text_labels_with_a_chosen_positive(cancer, tmp_path):
    path = tmp_path / "patients.csv"
    n = len(cancer)
    export = cancer.assign(
        PatientID=[f"P{i:05d}" for i in range(n)], record_no=np.arange(1, n + 1)
    )
    export.to_csv(path, index=False)
    read, roles = _read_roles(path, "diagnosis", positive="malignant")
    assert _roles(roles)["PatientID"] == "id" and _roles(roles)["record_no"] == "id"
    assert roles.classes == ("benign", "malignant")
    assert any("'malignant' (given as positive=)" in s for s in roles.statements)
    default = assign_roles(read.frame, "diagnosis")
    n_malignant = int((cancer["diagnosis"] == "malignant").sum())  # 212 in the shipped data
    assert default.positive == "malignant"
    assert any(f"minority class: {n_malignant} of {n}" in s for s in default.statements)


def test_weight_column_of_a_frequency_table(tmp_path):
    fair = sm.datasets.fair.load_pandas().data
    table = (
        fair.assign(affair=np.where(fair["affairs"] > 0, "yes", "no"))
        .groupby(["occupation", "religious", "affair"])
        .size()
        .rename("count")
        .reset_index()
    )
    path = tmp_path / "fair_counts.csv"
    table.to_csv(path, index=False)
    read, roles = _read_roles(path, "affair", weight="count")
    assert roles.weight == "count"
    assert read.frame["count"].sum() == len(fair)  # every row of the data counted once
    assert _roles(roles) == {
        "affair": "target",
        "occupation": "feature",
        "religious": "feature",
        "count": "weight",
    }


@pytest.mark.parametrize(
    ("text", "message"),
    [
        ("", "is empty"),
        ("a,b,y\n", "has a header but no data rows"),
    ],
)
def test_bad_files_one_line(tmp_path, text, message):
    path = tmp_path / "bad.csv"
    path.write_text(text)
    with pytest.raises(FrameInputError, match=message) as info:
        read_table(path)
    assert "\n" not in str(info.value)


def test_bad_options(tmp_path):
    with pytest.raises(FrameInputError, match="file not found"):
        read_table(tmp_path / "nope.csv")
    path = tmp_path / "ok.csv"
    path.write_text("a,y\n1,0\n2,1\n")
    with pytest.raises(FrameInputError, match="decimal must be '.' or ','"):
        read_table(path, decimal=";")
