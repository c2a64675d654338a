"""Figures of the df.bayeslogit accessor: rendered with Agg, checked by artists."""

import io
import sys

import matplotlib
import numpy as np
import pytest
from matplotlib.colors import to_rgba
from matplotlib.figure import Figure

import skbayeslogit.accessor  # noqa: F401  (registers df.bayeslogit)
from skbayeslogit import plotting
from skbayeslogit.datasets import FEATURES, TARGET, make_orchard_lots
from skbayeslogit.plotting import axis_label

matplotlib.use("Agg")


@pytest.fixture(scope="module")
def df2():
    return make_orchard_lots(300, random_state=4)


@pytest.fixture(scope="module")
def df3():
    return make_orchard_lots(300, n_classes=3, random_state=4)


@pytest.fixture(scope="module")
def m2(df2):
    return df2.bayeslogit.fit(TARGET, list(FEATURES))


@pytest.fixture(scope="module")
def m3(df3):
    return df3.bayeslogit.fit(TARGET, list(FEATURES), random_state=0)


def _by_gid(ax, gid):
    return [a for a in ax.get_children() if a.get_gid() == gid]


def _save(fig, tmp_path, name):
    path = tmp_path / f"{name}.png"
    fig.savefig(path, dpi=60)
    assert path.stat().st_size > 5000  # a real picture, not an empty canvas
    with open(path, "rb") as fh:
        assert fh.read(8) == b"\x89PNG\r\n\x1a\n"


# ----------------------------------------------------------------- labels


@pytest.mark.parametrize(
    ("name", "label"),
    [
        ("firmness_n", "firmness (N)"),
        ("soluble_solids_brix", "soluble solids (°Brix)"),
        ("bruise_share_pct", "bruise share (%)"),
        ("fruit_mass_g", "fruit mass (g)"),
        ("intake_temp_c", "intake temp (°C)"),
        ("days_since_bloom", "days since bloom (days)"),
        ("weight_kg", "weight (kg)"),
        ("starch_index", "starch index"),
        ("income", "income"),
        ("_n", "_n"),
        (3, "3"),
    ],
)
def test_axis_label_units(name, label):
    assert axis_label(name) == label


# ----------------------------------------------------------- coefficients


def test_plot_coefficients_binary(df2, m2, tmp_path):
    fig = df2.bayeslogit.plot_coefficients(m2, level=0.8)
    assert isinstance(fig, Figure)
    (ax,) = fig.axes
    intervals = _by_gid(ax, "interval")
    assert len(intervals) == len(FEATURES)
    table = m2.coef_table(0.8).drop(index="intercept")
    # Rows top to bottom in feature order; each line spans its interval.
    for line, (_, row) in zip(
        sorted(intervals, key=lambda l: -l.get_ydata()[0]), table.iterrows(), strict=True
    ):
        np.testing.assert_allclose(line.get_xdata(), [row["lower"], row["upper"]])
    # Filled marker exactly where the interval excludes zero.
    estimates = sorted(_by_gid(ax, "estimate"), key=lambda l: -l.get_ydata()[0])
    filled = [to_rgba(m.get_markerfacecolor()) != (1.0, 1.0, 1.0, 1.0) for m in estimates]
    assert filled == list((table["lower"] > 0) | (table["upper"] < 0))
    labels = [t.get_text() for t in ax.get_yticklabels()]
    assert labels == [axis_label(f) for f in FEATURES]  # set top row first
    assert "per standard deviation" in ax.get_xlabel()
    assert _by_gid(ax, "zero_line")
    _save(fig, tmp_path, "coef_binary")


def test_plot_coefficients_multiclass_and_intercept(df3, m3, tmp_path):
    fig = df3.bayeslogit.plot_coefficients(m3, include_intercept=True)
    (ax,) = fig.axes
    assert len(_by_gid(ax, "interval")) == 3 * (len(FEATURES) + 1)
    legend_text = [t.get_text() for t in fig.legends[0].get_texts()]
    assert set(m3.classes_) <= set(legend_text)
    _save(fig, tmp_path, "coef_multiclass")


def test_plot_coefficients_raw_scale_label(df2):
    raw = df2.bayeslogit.fit(TARGET, standardize=False, prior_scale=1.0)
    fig = df2.bayeslogit.plot_coefficients(raw)
    assert "per unit" in fig.axes[0].get_xlabel()


def test_plot_coefficients_needs_a_posterior(df2):
    from sklearn.linear_model import LogisticRegression

    m = df2.bayeslogit.fit(TARGET, model=LogisticRegression())
    with pytest.raises(TypeError, match="no posterior"):
        df2.bayeslogit.plot_coefficients(m)


# --------------------------------------------------------------- boundary


def test_plot_boundary(df2, m2, tmp_path):
    fig = df2.bayeslogit.plot_boundary(m2, "firmness_n", "bruise_share_pct", n_draws=15)
    (ax,) = fig.axes
    assert len(_by_gid(ax, "posterior_draw")) == 15
    data = _by_gid(ax, "data")
    assert len(data) == 2
    assert sum(len(c.get_offsets()) for c in data) == len(df2)
    assert ax.get_xlabel() == "firmness (N)"
    assert ax.get_ylabel() == "bruise share (%)"
    assert len(ax.collections) >= 4  # band fill, band edge, boundary, two data sets
    assert "held at their means" in ax.get_title(loc="left")
    _save(fig, tmp_path, "boundary")


def test_plot_boundary_draws_match_the_posterior(df2):
    # Two-feature raw-scale model: each drawn line is a posterior draw's
    # boundary a x + b y + c = 0, checked against sample_coef with the seed.
    m = df2.bayeslogit.fit(TARGET, ["firmness_n", "bruise_share_pct"], standardize=False)
    fig = df2.bayeslogit.plot_boundary(
        m, "firmness_n", "bruise_share_pct", n_draws=5, random_state=3
    )
    draws = m.sample_coef(5, random_state=3)
    lines = _by_gid(fig.axes[0], "posterior_draw")
    for line, (a, b, c) in zip(lines, draws, strict=True):
        x, y = line.get_xdata(), line.get_ydata()
        np.testing.assert_allclose(a * x + b * y + c, 0.0, atol=1e-9)


def test_plot_boundary_options_and_errors(df2, df3, m2, m3):
    fig = df2.bayeslogit.plot_boundary(m2, "firmness_n", "starch_index", n_draws=0)
    assert not _by_gid(fig.axes[0], "posterior_draw")
    with pytest.raises(KeyError, match="'orchard' is not a feature.*firmness_n"):
        df2.bayeslogit.plot_boundary(m2, "orchard", "firmness_n")
    with pytest.raises(ValueError, match="two different features"):
        df2.bayeslogit.plot_boundary(m2, "firmness_n", "firmness_n")
    with pytest.raises(ValueError, match="binary boundary"):
        df3.bayeslogit.plot_boundary(m3, "firmness_n", "bruise_share_pct")
    from sklearn.linear_model import LogisticRegression

    from skbayeslogit.laplace import LaplaceLogisticClassifier

    plain = df2.bayeslogit.fit(TARGET, model=LogisticRegression())
    fig = df2.bayeslogit.plot_boundary(plain, "firmness_n", "bruise_share_pct")
    assert not _by_gid(fig.axes[0], "posterior_draw")
    assert "no posterior" in fig.axes[0].get_title(loc="left")

    bare = LaplaceLogisticClassifier(prior_scale=1.0).fit(df2[list(FEATURES)], df2[TARGET])
    with pytest.raises(ValueError, match="pass target="):
        df2.bayeslogit.plot_boundary(bare, "firmness_n", "bruise_share_pct")
    fig = df2.bayeslogit.plot_boundary(bare, "firmness_n", "bruise_share_pct", target=TARGET)
    assert len(_by_gid(fig.axes[0], "posterior_draw")) == 20


# ------------------------------------------------------------ calibration


def test_plot_calibration_binary(df2, m2, tmp_path):
    fig = df2.bayeslogit.plot_calibration(TARGET, m2, bins=8)
    ax, hist = fig.axes
    (curve,) = _by_gid(ax, "reliability")
    table = df2.bayeslogit.calibration(TARGET, m2, bins=8)
    full = table[table["count"] > 0]
    np.testing.assert_allclose(curve.get_xdata(), full["mean_predicted"])
    np.testing.assert_allclose(curve.get_ydata(), full["observed_frequency"])
    assert [p.get_height() for p in hist.patches] == list(table["count"])
    assert ax.get_ylabel().startswith("observed frequency")
    assert hist.get_xlabel() == "predicted probability of long_storage"
    assert any(f"{table.attrs['ece']:.3f}" in t.get_text() for t in ax.texts)
    _save(fig, tmp_path, "calibration_binary")


def test_plot_calibration_multiclass(df3, m3, tmp_path):
    fig = df3.bayeslogit.plot_calibration(TARGET, m3)
    ax, hist = fig.axes
    curves = _by_gid(ax, "reliability")
    assert [c.get_label() for c in curves] == list(m3.classes_)
    # Series differ by marker and line style, not colour alone.
    assert len({c.get_marker() for c in curves}) == 3
    assert len({c.get_linestyle() for c in curves}) == 3
    assert len(hist.patches) == 3 * 10
    _save(fig, tmp_path, "calibration_multiclass")


# ---------------------------------------------------------- matplotlib


def test_missing_matplotlib_names_the_plot_extra(df2, m2, monkeypatch):
    monkeypatch.setitem(sys.modules, "matplotlib", None)
    monkeypatch.setitem(sys.modules, "matplotlib.figure", None)
    with pytest.raises(ImportError, match=r'pip install "skbayeslogit\[plot\]"'):
        plotting.require_matplotlib()
    with pytest.raises(ImportError, match="plot extra"):
        df2.bayeslogit.plot_coefficients(m2)


def test_figures_do_not_use_pyplot(df2, m2, monkeypatch):
    # With pyplot unimportable every figure must still be drawn and saved:
    # no global figure manager, no GUI backend.
    monkeypatch.setitem(sys.modules, "matplotlib.pyplot", None)
    figs = [
        df2.bayeslogit.plot_coefficients(m2),
        df2.bayeslogit.plot_calibration(TARGET, m2),
        df2.bayeslogit.plot_boundary(m2, "firmness_n", "bruise_share_pct", n_draws=3),
    ]
    for fig in figs:
        fig.savefig(io.BytesIO(), format="png", dpi=40)
