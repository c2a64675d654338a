"""Model files that cannot run code: skops archives with an explicit list of trusted types.

The reference of each round trip is the in-memory model the file was
written from (bit-identical outputs). The trusted-type check asks skops
itself (``skops.io.get_untrusted_types``) what our own files hold.
"""

import io
import pickle
import re
import warnings
import zipfile

import joblib
import numpy as np
import pandas as pd
import pytest
import skops.io as sio

import skbayeslogit  # noqa: F401  (registers df.bayeslogit)
from skbayeslogit._frame.registry import (
    ModelRecord,
    available_models,
    binary_only,
    make_model,
)
from skbayeslogit._output.model_file import (
    TRUSTED_TYPES,
    ModelFileError,
    load_model_file,
    save_model_file,
)
from skbayeslogit.cli import main
from skbayeslogit.datasets import make_orchard_lots

LOTS = make_orchard_lots(120, random_state=21)
FEATS = ["firmness_n", "starch_index", "bruise_share_pct"]
THREE = LOTS.assign(
    grade3=pd.cut(LOTS["soluble_solids_brix"], 3, labels=["low", "mid", "high"]).astype(str)
)


def _fitted(name, target):
    frame = THREE if target == "grade3" else LOTS
    seed = {"random_state": 3} if "random_state" in make_model(name).get_params() else {}
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        return frame, frame.bayeslogit.fit(target, FEATS, model=name, **seed)


def _cases():
    cases = []
    for name in available_models():
        for target in ("storage_grade", "grade3"):
            if target == "grade3" and binary_only(name):
                continue
            for used in (False, True):
                cases.append((name, target, used))
    return cases


CASES = _cases()


def _use(frame, target, model):
    """What the report does with a model before it saves it."""
    frame.bayeslogit.predict_table(model)
    frame.bayeslogit.calibration(target, model)
    if hasattr(model, "predict_interval"):
        model.predict_interval(frame[FEATS])


def _save(tmp_path, name, target, used):
    frame, model = _fitted(name, target)
    if used:
        _use(frame, target, model)
    path = tmp_path / f"{name}_{target}_{used}.skops"
    save_model_file(path, model, model_name=name, target=target, features=FEATS,
                    classes=model.classes_)  # fmt: skip
    return frame, model, path


def _categorical_model(tmp_path):
    """A model with a text column one-hot encoded and a numeric gap imputed."""
    frame = LOTS.copy()
    frame.loc[frame.index[:3], "firmness_n"] = np.nan
    model = frame.bayeslogit.fit(
        "storage_grade", [*FEATS, "orchard"], model="laplace", missing="impute"
    )
    path = tmp_path / "categorical.skops"
    save_model_file(path, model, model_name="laplace", target="storage_grade",
                    features=[*FEATS, "orchard"], classes=model.classes_)  # fmt: skip
    return frame, model, path


def test_our_files_hold_exactly_the_trusted_types(tmp_path):
    """Every model of the registry, binary and multiclass, fresh and after the
    report has used it, and a model with a categorical column and imputed
    cells: skops finds exactly TRUSTED_TYPES beyond its defaults. A new type
    in a model makes this fail rather than being trusted silently."""
    found = set()
    for name, target, used in CASES:
        *_, path = _save(tmp_path, name, target, used)
        found |= set(sio.get_untrusted_types(file=path))
    *_, path = _categorical_model(tmp_path)
    found |= set(sio.get_untrusted_types(file=path))
    assert sorted(found) == sorted(TRUSTED_TYPES)


def test_categorical_model_round_trip(tmp_path):
    """The encoding travels with the model: same probabilities, same names."""
    frame, model, path = _categorical_model(tmp_path)
    loaded = load_model_file(path)["model"]
    assert any(name.startswith("orchard=") for name in loaded.feature_names_out_)
    np.testing.assert_array_equal(loaded.predict_proba(frame), model.predict_proba(frame))


@pytest.mark.parametrize(("name", "target", "used"), CASES)
def test_round_trip_gives_identical_outputs(tmp_path, name, target, used):
    frame, model, path = _save(tmp_path, name, target, used)
    saved = load_model_file(path)
    assert saved["features"] == FEATS and saved["target"] == target
    assert (
        saved["model_name"] == name and saved["skbayeslogit_version"] == skbayeslogit.__version__
    )
    loaded = saved["model"]
    X = frame[FEATS]
    np.testing.assert_array_equal(loaded.predict_proba(X), model.predict_proba(X))
    if hasattr(model, "predict_interval"):
        for a, b in zip(loaded.predict_interval(X), model.predict_interval(X), strict=True):
            np.testing.assert_array_equal(a, b)


class _Runs:
    """A pickle that runs code on load (what an attacker's file would do)."""

    def __init__(self, marker):
        self.marker = str(marker)

    def __reduce__(self):
        return (open, (self.marker, "w"))


def _skops_bytes(obj):
    return sio.dumps(obj)


def _zip_bytes():
    buf = io.BytesIO()
    with zipfile.ZipFile(buf, "w") as z:
        z.writestr("hello.txt", "not a model")
    return buf.getvalue()


def _model():
    return _fitted("laplace", "storage_grade")[1]


_FULL = {"target": "storage_grade", "model_name": "laplace", "skbayeslogit_version": "0.1.0"}

# (case, file bytes or a builder given tmp_path, trust_pickle, the error's pattern)
REFUSALS = [
    ("pickle of a model dict", lambda p: _joblib({"model": 1, "features": FEATS}), False,
     r"pickle \(joblib\) file.*--trust-pickle"),
    ("code-running pickle", lambda p: pickle.dumps(_Runs(p / "ran.txt")), False,
     r"pickle \(joblib\) file"),
    ("text", lambda p: b"firmness_n,starch_index\n1,2\n", False, "not a skbayeslogit model file"),
    ("empty file", lambda p: b"", False, "not a skbayeslogit model file"),
    ("zip that is not skops", lambda p: _zip_bytes(), False, "damaged or not a model file"),
    ("truncated archive", lambda p: _skops_bytes({"a": 1})[:200], False,
     "damaged or not a model file"),
    ("no feature list", lambda p: _skops_bytes({"model": _model(), **_FULL}), False,
     r"lacks features \(the feature list\)$"),
    ("nothing but a model", lambda p: _skops_bytes({"model": _model()}), False,
     r"lacks features \(the feature list\), target \(the target name\), model_name"),
    ("a list", lambda p: _skops_bytes([1, 2]), False, "holds a list, not a model file"),
    ("untrusted type", lambda p: _skops_bytes({"r": ModelRecord("x", "Y", "t")}), False,
     r"does not trust: skbayeslogit\._frame\.registry\.ModelRecord"),
    ("feature count differs", lambda p: _skops_bytes(
        {"model": _model(), "features": FEATS[:2], **_FULL}), False, r"names 2 column.*on 3"),
    ("features not names", lambda p: _skops_bytes(
        {"model": _model(), "features": [1, 2, 3], **_FULL}), False, "non-empty list"),
    ("empty feature list", lambda p: _skops_bytes(
        {"model": _model(), "features": [], **_FULL}), False, "non-empty list"),
    ("model not a classifier", lambda p: _skops_bytes(
        {"model": np.zeros(3), "features": FEATS, **_FULL}), False, "not a fitted classifier"),
    ("trusted pickle lacking features", lambda p: _joblib({"model": _model(), **_FULL}), True,
     r"lacks features \(the feature list\)$"),
    ("trusted pickle of garbage", lambda p: b"\x80\x04garbage", True, "as a pickle"),
]  # fmt: skip


def _joblib(obj):
    buf = io.BytesIO()
    joblib.dump(obj, buf)
    return buf.getvalue()


@pytest.mark.parametrize(
    ("case", "content", "trust", "match"), REFUSALS, ids=[c[0] for c in REFUSALS]
)
def test_bad_model_files_are_refused_in_one_line(tmp_path, case, content, trust, match):
    path = tmp_path / "model.skops"
    path.write_bytes(content(tmp_path))
    with pytest.raises(ModelFileError) as info:
        load_model_file(path, trust_pickle=trust)
    message = str(info.value)
    assert "\n" not in message and str(path) in message
    assert re.search(match, message), message
    # Nothing in the file ran: the code-running pickle would have made this file.
    assert not (tmp_path / "ran.txt").exists()


@pytest.mark.parametrize("case", ["folder", "missing"])
def test_model_file_paths_that_are_not_files(tmp_path, case):
    path = tmp_path / "models"
    if case == "folder":
        path.mkdir()
    with pytest.raises(ModelFileError, match="is a folder" if case == "folder" else "not found"):
        load_model_file(path)


@pytest.fixture(scope="module")
def scored(tmp_path_factory):
    """An old-style (pickle) model file and new rows, with the model's own predictions."""
    tmp = tmp_path_factory.mktemp("old")
    model = _model()
    old = tmp / "model_laplace.joblib"
    joblib.dump({"model": model, "features": FEATS, "classes": list(model.classes_), **_FULL},
                old)  # fmt: skip
    LOTS[FEATS].to_csv(tmp / "new.csv", index=False)
    return tmp, old, model.predict_proba(LOTS[FEATS])[:, 1]


def test_cli_refuses_a_pickle_and_loads_it_with_trust_pickle(scored, capsys):
    tmp, old, expected = scored
    assert main(["score", str(old), str(tmp / "new.csv"), "--quiet"]) == 2
    err = capsys.readouterr().err.strip().splitlines()
    assert len(err) == 1 and "--trust-pickle" in err[0] and "Traceback" not in err[0]
    out = tmp / "pred.csv"
    code = main(["score", str(old), str(tmp / "new.csv"), "--trust-pickle", "--quiet",
                 "--out", str(out)])  # fmt: skip
    assert code == 0
    # pandas writes 17 significant digits: the CSV round trip is exact to 1e-15.
    np.testing.assert_allclose(pd.read_csv(out)["prob_long_storage"], expected, rtol=1e-15)


@pytest.mark.parametrize("command", ["score", "report"])
def test_help_says_what_a_model_file_is_and_to_trust_it(command, capsys):
    with pytest.raises(SystemExit):
        main([command, "--help"])
    text = " ".join(capsys.readouterr().out.split())
    assert "model file" in text.lower() and "sources you trust" in text
    if command == "score":
        assert "--trust-pickle" in text and "runs any code" in text
