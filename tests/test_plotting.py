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
from skbayeslogit._frame.evaluation import calibration_table
from skbayeslogit._frame.figures import calibration_view
from skbayeslogit._frame.formatting import significant
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
    assert any(significant(table.attrs["ece"]) in t.get_text() for t in ax.texts)
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


def _in_bins(p, edges):
    """Bin of each probability, bins closed on the right and the first on both sides."""
    return np.clip(np.searchsorted(edges, p, side="left") - 1, 0, len(edges) - 2)


def test_quantile_bins_are_numpy_quantiles(df2, m2):
    """Equal-count edges are numpy's inverted-CDF quantiles of the predictions;
    counts and means are recomputed here with boolean masks."""
    table = calibration_table(df2, TARGET, m2, 8, False, binning="quantile")
    p = m2.predict_proba(df2[list(FEATURES)])[:, 1]
    hit = df2[TARGET].to_numpy() == "long_storage"
    # Reference: numpy.quantile (inverted empirical CDF), repeated edges merged.
    edges = np.unique(np.quantile(p, np.linspace(0, 1, 9), method="inverted_cdf"))
    np.testing.assert_array_equal(
        np.append(table["bin_lower"], table["bin_upper"].iloc[-1]), edges
    )
    ids = _in_bins(p, edges)
    for k, row in table.iterrows():
        mask = ids == k
        assert row["count"] == mask.sum()
        assert row["mean_predicted"] == pytest.approx(p[mask].mean(), rel=1e-12)
        assert row["observed_frequency"] == pytest.approx(hit[mask].mean(), rel=1e-12)
    # Equal count: 300 rows in 8 bins hold 37 or 38 each (no tied probabilities here).
    assert set(table["count"]) <= {37, 38}
    assert (table["binning"] == "quantile").all()


def test_weighted_rows_count_by_their_weight(df2):
    """A model fitted with a weight column: bins, ECE, Brier and log loss weigh
    every row. References: np.average with the weights, numpy's weighted
    inverted-CDF quantiles, scikit-learn's brier_score_loss and log_loss with
    sample_weight."""
    from sklearn.metrics import brier_score_loss, log_loss

    frame = df2.assign(w=np.random.default_rng(3).integers(1, 5, len(df2)))
    model = frame.bayeslogit.fit(TARGET, list(FEATURES), weight="w")
    table = calibration_table(frame, TARGET, model, 6, False, binning="both")
    P = model.predict_proba(frame[list(FEATURES)])
    p, w = P[:, 1], frame["w"].to_numpy(dtype=float)
    y = frame[TARGET].to_numpy()
    hit = y == "long_storage"
    for binning in ("uniform", "quantile"):
        part = table[table["binning"] == binning].reset_index(drop=True)
        if binning == "quantile":
            q = np.quantile(p, np.linspace(0, 1, 7), weights=w, method="inverted_cdf")
            edges = np.unique(q)
        else:
            edges = np.linspace(0, 1, 7)
        np.testing.assert_allclose(part["bin_lower"], edges[:-1], rtol=0, atol=0)
        ids = _in_bins(p, edges)
        ece = 0.0
        for k, row in part.iterrows():
            mask = ids == k
            assert row["weight"] == w[mask].sum()
            if not mask.any():
                continue
            mean_p = np.average(p[mask], weights=w[mask])
            observed = np.average(hit[mask], weights=w[mask])
            assert row["mean_predicted"] == pytest.approx(mean_p, rel=1e-12)
            assert row["observed_frequency"] == pytest.approx(observed, rel=1e-12)
            ece += w[mask].sum() / w.sum() * abs(observed - mean_p)
        assert table.attrs["ece_by_binning"][binning] == pytest.approx(ece, rel=1e-12)
    assert table.attrs["brier"] == pytest.approx(
        brier_score_loss(y, p, sample_weight=w, pos_label="long_storage"), rel=1e-12
    )
    assert table.attrs["log_loss"] == pytest.approx(
        log_loss(y, P, sample_weight=w, labels=model.classes_), rel=1e-12
    )
    assert table.attrs["weight_total"] == w.sum()


@pytest.mark.parametrize("frame", ["df2", "df3"])
def test_plot_calibration_draws_both_binnings(frame, request, tmp_path):
    df = request.getfixturevalue(frame)
    model = request.getfixturevalue("m2" if frame == "df2" else "m3")
    table = calibration_table(df, TARGET, model, 10, False, binning="both")
    fig = plotting.calibration_figure(**calibration_view(table, TARGET))
    assert len(fig.axes) == 4  # curves and counts, equal-width then equal-count
    curve_axes = [a for a in fig.axes if _by_gid(a, "reliability")]
    for ax, binning in zip(curve_axes, ("uniform", "quantile"), strict=True):
        part = table[(table["binning"] == binning) & (table["count"] > 0)]
        curves = _by_gid(ax, "reliability")
        drawn_x = np.concatenate([c.get_xdata() for c in curves])
        np.testing.assert_allclose(np.sort(drawn_x), np.sort(part["mean_predicted"]))
    text = " ".join(t.get_text() for t in fig.axes[0].texts)
    for binning, name in (("uniform", "equal-width"), ("quantile", "equal-count")):
        assert f"ECE, {name}: {significant(table.attrs['ece_by_binning'][binning])}" in text
    _save(fig, tmp_path, f"calibration_both_{frame}")


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
