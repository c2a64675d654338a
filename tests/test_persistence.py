"""Persistence: pickle, joblib (also memory-mapped read-only), and the CLI's
saved models scoring new rows in a fresh process.

The reference of every check is the in-memory model the file was written
from: a round trip must give bit-identical outputs.
"""

import os
import pickle
import subprocess
import sys
import warnings

import joblib
import numpy as np
import pandas as pd
import pytest

from skbayeslogit import (
    LaplaceLogisticClassifier,
    ProbitClassifier,
    TemperedLogisticClassifier,
)
from skbayeslogit._output.model_file import load_model_file
from skbayeslogit.cli import main
from skbayeslogit.datasets import make_orchard_lots

RNG = np.random.default_rng(17)
X = RNG.normal(size=(80, 3))
Y2 = (X[:, 0] + RNG.normal(size=80) > 0).astype(int)
Y3 = np.argmax(X + RNG.gumbel(size=(80, 3)), axis=1)
NEW = RNG.normal(size=(25, 3))

MODELS = {
    "laplace": lambda: LaplaceLogisticClassifier(prior_scale=1.0).fit(X, Y2),
    "laplace-mc-3class": lambda: LaplaceLogisticClassifier(
        prior_scale=1.0, predictive="mc", n_draws=200, random_state=3
    ).fit(X, Y3),
    "probit-mle": lambda: ProbitClassifier(prior_scale=None).fit(X, Y2),
    "tempered": lambda: TemperedLogisticClassifier().fit(X, Y2),
    "tempered-3class": lambda: TemperedLogisticClassifier(t2=1.5).fit(X, Y3),
}


def _outputs(model):
    out = {
        "predict": model.predict(NEW),
        "proba": model.predict_proba(NEW),
        "log_proba": model.predict_log_proba(NEW),
        "decision": model.decision_function(NEW),
    }
    if hasattr(model, "predict_interval"):
        out["interval"] = np.asarray(model.predict_interval(NEW, level=0.8))
        out["draws"] = model.sample_coef(10, random_state=5)
        out["table"] = model.coef_table(0.8).to_numpy()
    return out


def _assert_same(a, b):
    assert a.keys() == b.keys()
    for key in a:
        np.testing.assert_array_equal(a[key], b[key], err_msg=key)


@pytest.mark.parametrize("name", list(MODELS))
def test_pickle_round_trip_is_identical(name):
    model = MODELS[name]()
    _assert_same(_outputs(pickle.loads(pickle.dumps(model))), _outputs(model))


@pytest.mark.parametrize("mmap_mode", [None, "r"])
@pytest.mark.parametrize("name", list(MODELS))
def test_joblib_round_trip_is_identical(tmp_path, name, mmap_mode):
    model = MODELS[name]()
    path = tmp_path / "model.joblib"
    joblib.dump(model, path)
    loaded = joblib.load(path, mmap_mode=mmap_mode)
    if mmap_mode == "r":
        # The premise: the fitted arrays really are read-only maps of the file.
        assert isinstance(loaded.coef_, np.memmap) and not loaded.coef_.flags.writeable
    _assert_same(_outputs(loaded), _outputs(model))
    # A memory-mapped model can be refitted (fitting replaces, never writes
    # into, its arrays) and gives the fresh fit again.
    refit = loaded.fit(X, Y3 if "3class" in name else Y2)
    _assert_same(_outputs(refit), _outputs(MODELS[name]()))


@pytest.fixture(scope="module")
def cli_models(tmp_path_factory):
    """Models written by ``skbayeslogit report --out`` on the demo scenario."""
    out = tmp_path_factory.mktemp("report")
    lots = make_orchard_lots(200, random_state=11)
    train, new = lots.iloc[:160], lots.iloc[160:].drop(columns="storage_grade")
    train.to_csv(out / "train.csv", index=False)
    new.to_csv(out / "new.csv", index=False)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        code = main(["report", str(out / "train.csv"), "--target", "storage_grade",
                     "--models", "laplace,tempered", "--cv", "2", "--quiet",
                     "--out", str(out / "report")])  # fmt: skip
    assert code == 0
    return out, new


def test_cli_models_score_new_rows_in_a_fresh_process(cli_models):
    out, new = cli_models
    env = {**os.environ, "MPLBACKEND": "Agg"}
    procs = {}
    for name in ("laplace", "tempered"):
        # Both interpreters at once: each pays its own import and numba start.
        procs[name] = subprocess.Popen(
            [sys.executable, "-m", "skbayeslogit", "score",
             str(out / "report" / f"model_{name}.skops"),
             str(out / "new.csv"), "--level", "0.8", "--out", str(out / f"pred_{name}.csv"),
             "--quiet"],
            stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True, env=env,
        )  # fmt: skip
    for name, proc in procs.items():
        stdout, stderr = proc.communicate(timeout=300)
        assert proc.returncode == 0, stderr
        scored = pd.read_csv(out / f"pred_{name}.csv")
        saved = load_model_file(out / "report" / f"model_{name}.skops")
        model, features = saved["model"], saved["features"]
        P = model.predict_proba(new[features])
        positive = model.classes_[1]
        # pandas writes floats with 17 significant digits (round trip exact
        # up to the last decimal's rounding): 1e-15 relative.
        np.testing.assert_allclose(scored[f"prob_{positive}"], P[:, 1], rtol=1e-15)
        np.testing.assert_array_equal(
            scored["predicted_label"], model.classes_[np.argmax(P, axis=1)]
        )
        if name == "laplace":
            lo, hi = model.predict_interval(new[features], level=0.8)
            np.testing.assert_allclose(scored[f"prob_{positive}_lower"], lo, rtol=1e-15)
            np.testing.assert_allclose(scored[f"prob_{positive}_upper"], hi, rtol=1e-15)
        assert len(scored) == len(new)
