"""Column roles: every column exactly one role, every left-out column a reason.

The tables are checked against what the data are by construction or by an
independent count (pandas' ``isna``/``nunique``/``value_counts``); data:
scikit-learn's breast-cancer and wine sets (Wolberg, Street & Mangasarian
1995; Forina et al., UCI), shipped in scikit-learn.
"""

import warnings

import numpy as np
import pandas as pd
import pytest
from sklearn.datasets import load_breast_cancer, load_wine

from skbayeslogit._frame.errors import FrameInputError, LabelVariantWarning
from skbayeslogit._frame.roles import assign_roles


@pytest.fixture(scope="module")
def cancer():
    data = load_breast_cancer(as_frame=True)
    df = data.frame.copy()
    df["diagnosis"] = np.where(data.target == 0, "malignant", "benign")
    return df.drop(columns="target")


def _roles(result):
    return result.table.set_index("column")["role"].to_dict()


def test_every_column_one_role_and_left_out_has_reason(cancer):
    rng = np.random.default_rng(3)
    n = len(cancer)
    df = cancer.assign(
        patient_id=np.arange(1000, 1000 + n),
        clinic=rng.choice(["north", "south", "east"], n),
        remark=[f"seen on day {i}" for i in range(n)],
        batch=np.where(np.arange(n) < 5, "b1", "b1"),
        empty=np.nan,
    )
    before = df.copy()
    result = assign_roles(df, "diagnosis")
    table = result.table
    assert list(table["column"]) == ["diagnosis"] + [c for c in df.columns if c != "diagnosis"]
    roles = _roles(result)
    assert roles["diagnosis"] == "target"
    assert roles["patient_id"] == "id" and roles["remark"] == "id"
    assert roles["batch"] == "left out" and roles["empty"] == "left out"
    assert result.categorical == ["clinic"]
    assert result.numeric == list(load_breast_cancer().feature_names)
    out = table[table["role"] == "left out"]
    assert (out["reason"].str.len() > 0).all()
    # missing and distinct counts equal pandas' own
    expect = df.isna().sum()
    assert table.set_index("column")["missing"].to_dict() == expect.to_dict()
    assert table.set_index("column").loc["clinic", "distinct"] == df["clinic"].nunique()
    pd.testing.assert_frame_equal(df, before)


@pytest.mark.parametrize(
    ("name", "is_id"),
    [
        ("lot_id", True),
        ("CustomerID", True),
        ("Case No", True),
        ("order number", True),
        ("zip_code", True),
        ("key", True),
        ("valid", False),
        ("width", False),
        ("number_of_children", False),
        ("identity_score", False),
    ],
)
def test_id_by_name(name, is_id):
    rng = np.random.default_rng(0)
    df = pd.DataFrame({name: rng.integers(0, 5, 40), "x": rng.normal(size=40), "y": [0, 1] * 20})
    result = assign_roles(df, "y")
    assert (_roles(result)[name] == "id") is is_id
    said = any(name in s and "ID" in s for s in result.statements)
    assert said is is_id


def test_id_by_values_and_explicit_overrides():
    n = 60
    df = pd.DataFrame(
        {"serial": np.arange(n) * 7 + 3, "x": np.linspace(0, 1, n), "y": [0, 1, 1] * 20}
    )
    assert _roles(assign_roles(df, "y"))["serial"] == "id"
    assert _roles(assign_roles(df, "y", features=["serial", "x"]))["serial"] == "feature"
    assert _roles(assign_roles(df, "y", exclude=["serial"]))["serial"] == "left out"
    given = assign_roles(df, "y", id=["serial"]).table.set_index("column")
    assert given.loc["serial", "reason"] == "given as id="


def test_features_names_with_commas():
    df = pd.DataFrame(
        {"mass, kg": [1.0, 2, 3, 4], "height, cm": [5.0, 3, 4, 1], "y": ["a", "b", "a", "b"]}
    )
    result = assign_roles(df, "y", features=["mass, kg"])
    assert result.numeric == ["mass, kg"]
    assert _roles(result)["height, cm"] == "left out"


def test_target_copies_are_refused_by_name(cancer):
    df = cancer.assign(**{"diagnosis.1": cancer["diagnosis"]})
    with pytest.raises(FrameInputError, match=r"'diagnosis\.1' is a renamed duplicate") as info:
        assign_roles(df, "diagnosis")
    assert "\n" not in str(info.value)
    assert _roles(assign_roles(df, "diagnosis", exclude=["diagnosis.1"]))["diagnosis.1"] == (
        "left out"
    )


def test_target_copies_are_refused_by_values(cancer):
    coded = (cancer["diagnosis"] == "malignant").astype(int)
    with pytest.raises(FrameInputError, match="'is_malignant' is one-to-one with the target"):
        assign_roles(cancer.assign(is_malignant=coded), "diagnosis")
    letter = cancer["diagnosis"].str[0].str.upper()
    with pytest.raises(FrameInputError, match="'code_letter' is one-to-one with the target"):
        assign_roles(cancer.assign(code_letter=letter), "diagnosis")
    # Two values that do not follow the target are a feature like any other.
    shuffled = coded.sample(frac=1.0, random_state=0).to_numpy()
    result = assign_roles(cancer.assign(flag=shuffled), "diagnosis")
    assert _roles(result)["flag"] == "feature"


def test_saved_index_is_left_out_and_never_a_feature(cancer):
    df = cancer.sort_values("diagnosis").reset_index(drop=True).reset_index()
    df = df.rename(columns={"index": "Unnamed: 0"})
    result = assign_roles(df, "diagnosis")
    assert _roles(result)["Unnamed: 0"] == "left out"
    assert "index" in result.table.set_index("column").loc["Unnamed: 0", "reason"]
    with pytest.raises(FrameInputError, match="'Unnamed: 0' is a saved row index"):
        assign_roles(df, "diagnosis", features=["Unnamed: 0", "mean radius"])


def test_levels_bool_category_and_free_text():
    n = 100
    rng = np.random.default_rng(1)
    df = pd.DataFrame(
        {
            "smoker": rng.integers(0, 2, n).astype(bool),
            "grade": pd.Categorical(rng.choice(["low", "mid", "high"], n)),
            "city": rng.choice([f"c{i}" for i in range(30)], n),
            "y": rng.choice(["p", "q"], n),
        }
    )
    result = assign_roles(df, "y", max_levels=20)
    assert result.categorical == ["smoker", "grade"]
    reason = result.table.set_index("column").loc["city", "reason"]
    assert "max_levels=20" in reason and str(df["city"].nunique()) in reason
    assert "city" in assign_roles(df, "y", max_levels=40).categorical
    with pytest.raises(FrameInputError, match="feature column 'city' cannot be used"):
        assign_roles(df, "y", features=["city"])


def test_numeric_looking_text_names_a_cell():
    df = pd.DataFrame(
        {"dose": ["1.5", "2", "3", "12 3", "4", "5"] * 5, "x": np.arange(30.0), "y": [0, 1] * 15}
    )
    result = assign_roles(df, "y")
    reason = result.table.set_index("column").loc["dose", "reason"]
    assert _roles(result)["dose"] == "left out" and "'12 3'" in reason
    via_reading = assign_roles(df, "y", unparsed={"dose": "12 3"})
    assert "'12 3'" in via_reading.table.set_index("column").loc["dose", "reason"]


def test_positive_class_rules():
    y = ["no"] * 30 + ["yes"] * 10
    df = pd.DataFrame({"x": np.arange(40.0) % 7, "y": y})
    minority = assign_roles(df, "y")
    assert minority.positive == "yes" and minority.classes == ("no", "yes")
    assert any("minority" in s and "10 of 40" in s for s in minority.statements)
    given = assign_roles(df, "y", positive="no")
    assert given.classes == ("yes", "no")
    ordered = df.assign(y=pd.Categorical(y, categories=["yes", "no"], ordered=True))
    assert assign_roles(ordered, "y").positive == "no"
    tie = pd.DataFrame({"x": np.arange(40.0) % 7, "y": ["b", "a"] * 20})
    result = assign_roles(tie, "y")
    assert result.positive == "b" and any("tie" in s for s in result.statements)
    numeric = pd.DataFrame({"x": np.arange(40.0) % 7, "y": [0, 1, 1, 1] * 10})
    assert assign_roles(numeric, "y", positive="1").positive == 1
    with pytest.raises(FrameInputError, match="positive='maybe' is not a class of 'y'"):
        assign_roles(df, "y", positive="maybe")


def test_label_variants_warn():
    df = pd.DataFrame({"x": np.arange(12.0) % 5, "y": ["yes", "Yes ", "YES", "no"] * 3})
    with pytest.warns(LabelVariantWarning, match="'yes', 'Yes ', 'YES'"):
        assign_roles(df, "y")


def test_multiclass_target(cancer):
    wine = load_wine(as_frame=True).frame
    result = assign_roles(wine, "target")
    assert result.classes == (0, 1, 2) and result.positive is None
    with pytest.raises(FrameInputError, match="positive= applies to a binary target"):
        assign_roles(wine, "target", positive=1)


@pytest.mark.parametrize(
    ("weights", "problem"),
    [
        ([1.0, -1.0, 2.0, 1.0], "non-negative"),
        ([1.0, np.nan, 2.0, 1.0], "missing or infinite"),
        ([1.0, np.inf, 2.0, 1.0], "missing or infinite"),
        ([0.0, 0.0, 0.0, 0.0], "positive sum"),
        (["a", "b", "c", "d"], "not numeric"),
    ],
)
def test_bad_weight_is_one_line_naming_the_column(weights, problem):
    df = pd.DataFrame({"x": [1.0, 2, 3, 4], "freq": weights, "y": [0, 1, 0, 1]})
    with pytest.raises(FrameInputError, match=f"weight column 'freq'.*{problem}") as info:
        assign_roles(df, "y", weight="freq")
    assert "\n" not in str(info.value)


@pytest.mark.parametrize(
    ("kwargs", "message"),
    [
        ({"features": ["nope"]}, "features= names column"),
        ({"features": ["x"], "exclude": ["x"]}, "'x' is given in both features= and exclude="),
        ({"id": ["y"]}, "the target 'y' is also given in id="),
        ({"max_levels": 1}, "max_levels must be an integer >= 2"),
    ],
)
def test_bad_options(kwargs, message):
    df = pd.DataFrame({"x": [1.0, 2, 3, 4], "y": [0, 1, 0, 1]})
    with pytest.raises(FrameInputError, match=message):
        assign_roles(df, "y", **kwargs)


def test_target_problems():
    df = pd.DataFrame({"x": [1.0, 2, 3, 4], "y": [0.5, 1.5, 0.5, 2.0], "z": [1, 1, 1, np.nan]})
    with pytest.raises(FrameInputError, match="target 'y' holds non-integer numbers"):
        assign_roles(df, "y")
    with pytest.raises(FrameInputError, match="target 'z' has 1 class"):
        assign_roles(df, "z")
    with warnings.catch_warnings():
        warnings.simplefilter("error")
        assign_roles(df.assign(y=[0, 1, 0, 1]), "y")
