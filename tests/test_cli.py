"""End to end: ``skbayeslogit report`` and ``skbayeslogit score``."""

import base64
import re
import subprocess
import sys

import numpy as np
import pandas as pd
import pytest

from skbayeslogit._output.model_file import load_model_file
from skbayeslogit.cli import main
from skbayeslogit.datasets import make_orchard_lots

FAST = ["--models", "laplace,probit", "--cv", "3", "--quiet"]


@pytest.fixture(scope="module")
def demo_run(tmp_path_factory):
    out = tmp_path_factory.mktemp("demo")
    pytest.importorskip("matplotlib")
    code = main(["report", *FAST, "--cost-fp", "1", "--cost-fn", "4", "--out", str(out)])
    assert code == 0
    return out


def test_demo_report_prints_every_section(capsys):
    assert main(["report", *FAST]) == 0
    text = capsys.readouterr().out
    assert "DEMO DATA" in text
    for heading in (
        "Model comparison",
        "coefficients, features standardised (90% intervals)",
        "prior scale chosen by the Laplace evidence",
        "Calibration",
        "Confusion",
        "doubtful",
        "Predictive probabilities with 90% credible bounds",
        "Caution",
    ):
        assert heading in text, heading


def test_demo_files_match_the_estimator(demo_run):
    """The written coefficient table equals a fresh fit of the same model on
    the same demo data through the accessor (the report's own path)."""
    import skbayeslogit.accessor  # noqa: F401

    lots = make_orchard_lots(400, random_state=0)
    saved = load_model_file(demo_run / "model_laplace.skops")
    # The report fits the columns its roles made features (orchard one-hot encoded).
    model = lots.bayeslogit.fit("storage_grade", saved["features"], model="laplace")
    written = pd.read_csv(demo_run / "coefficients_laplace.csv", index_col=0)
    expected = model.coef_table(0.9)
    np.testing.assert_allclose(written["estimate"], expected["estimate"], rtol=1e-10)
    np.testing.assert_allclose(written["upper_original"], expected["upper_original"], rtol=1e-10)
    np.testing.assert_allclose(
        saved["model"].predict_proba(lots[saved["features"]]),
        model.predict_proba(lots[saved["features"]]),
        rtol=1e-12,
    )
    threshold = pd.read_csv(demo_run / "cost_threshold.csv", index_col=0)
    assert threshold.loc["decision_theoretic", "threshold"] == pytest.approx(1 / 5)


def test_html_report_embeds_every_figure(demo_run):
    page = (demo_run / "report.html").read_text(encoding="utf-8")
    pngs = sorted(p.stem for p in demo_run.glob("*.png"))
    assert len(pngs) >= 3
    embedded = re.findall(r"alt='([^']+)' src='data:image/png;base64,([^']+)'", page)
    assert sorted(name for name, _ in embedded) == pngs
    for name, data in embedded:
        assert base64.b64decode(data) == (demo_run / f"{name}.png").read_bytes()
    assert "screening aid" in page and "http" not in page  # opens offline


def test_report_on_a_csv_and_score_new_rows(tmp_path, capsys):
    lots = make_orchard_lots(300, random_state=4)
    train, new = lots.iloc[:250], lots.iloc[250:].drop(columns="storage_grade")
    train.to_csv(tmp_path / "lots.csv", index=False)
    new.to_csv(tmp_path / "new.csv", index=False)
    features = "firmness_n,starch_index,bruise_share_pct"
    out = tmp_path / "out"
    code = main(
        ["report", str(tmp_path / "lots.csv"), "--target", "storage_grade",
         "--features", features, *FAST, "--out", str(out)]
    )  # fmt: skip
    assert code == 0
    assert "file " in capsys.readouterr().out
    preds = tmp_path / "preds.csv"
    code = main(["score", str(out / "model_laplace.skops"), str(tmp_path / "new.csv"),
                 "--level", "0.8", "--out", str(preds), "--quiet"])  # fmt: skip
    assert code == 0
    scored = pd.read_csv(preds)
    saved = load_model_file(out / "model_laplace.skops")
    lo, hi = saved["model"].predict_interval(new[features.split(",")], level=0.8)
    np.testing.assert_allclose(scored["prob_long_storage_lower"], lo, rtol=1e-9)
    np.testing.assert_allclose(scored["prob_long_storage_upper"], hi, rtol=1e-9)
    assert len(scored) == 50 and set(scored["predicted_label"]) <= set(lots["storage_grade"])


def _run_error(args, capsys):
    code = main(args)
    err = capsys.readouterr().err
    assert code == 2
    lines = [line for line in err.strip().splitlines() if not line.startswith("[skbayeslogit]")]
    assert len(lines) == 1 and lines[0].startswith("skbayeslogit: error:")
    assert "Traceback" not in err
    return lines[0]


def test_errors_are_one_line_with_exit_code_2(tmp_path, capsys):
    assert "file not found" in _run_error(["report", str(tmp_path / "nope.csv"), "--target", "y"],
                                          capsys)  # fmt: skip
    lots = make_orchard_lots(60, random_state=1)
    lots.to_csv(tmp_path / "lots.csv", index=False)
    msg = _run_error(["report", str(tmp_path / "lots.csv"), "--target", "grade"], capsys)
    assert "grade" in msg and "storage_grade" in msg  # names the missing and the available
    # Issue 18: a text feature such as orchard is encoded now, no longer an
    # error (tests/test_accessor_roles.py).
    one = lots.assign(storage_grade="long_storage")
    one.to_csv(tmp_path / "one.csv", index=False)
    msg = _run_error(["report", str(tmp_path / "one.csv"), "--target", "storage_grade", *FAST],
                     capsys)  # fmt: skip
    assert "class" in msg
    msg = _run_error(["report", str(tmp_path / "lots.csv")], capsys)
    assert "--target" in msg


def test_score_names_missing_columns(tmp_path, capsys, demo_run):
    lots = make_orchard_lots(20, random_state=2).drop(columns=["firmness_n", "starch_index"])
    lots.to_csv(tmp_path / "new.csv", index=False)
    msg = _run_error(["score", str(demo_run / "model_laplace.skops"), str(tmp_path / "new.csv")],
                     capsys)  # fmt: skip
    assert "firmness_n" in msg and "starch_index" in msg


def test_debug_shows_the_traceback(tmp_path, capsys):
    assert main(["report", str(tmp_path / "nope.csv"), "--target", "y", "--debug"]) == 2
    assert "Traceback" in capsys.readouterr().err


def test_python_dash_m_entry_point():
    done = subprocess.run(
        [sys.executable, "-m", "skbayeslogit", "report", "--help"],
        capture_output=True,
        text=True,
        timeout=120,
    )
    assert done.returncode == 0 and "demo" in done.stdout


def test_missing_values_are_counted_or_dropped(tmp_path, capsys):
    lots = make_orchard_lots(120, random_state=5)
    lots.loc[[3, 8, 9], "firmness_n"] = np.nan
    lots.loc[[8], "starch_index"] = np.nan
    lots.to_csv(tmp_path / "gappy.csv", index=False)
    args = ["report", str(tmp_path / "gappy.csv"), "--target", "storage_grade", *FAST]
    msg = _run_error(args, capsys)
    assert "3 of 120 rows" in msg and "firmness_n (3)" in msg and "starch_index (1)" in msg
    assert "--dropna" in msg
    assert main([*args, "--dropna", "--out", str(tmp_path / "out")]) == 0
    out = capsys.readouterr().out
    assert "3 row(s) with missing values were left out" in out
    assert (tmp_path / "out" / "report.html").is_file()
