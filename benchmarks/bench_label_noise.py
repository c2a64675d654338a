"""Label noise: Laplace, tempered and label-flip logistic models on corrupted labels.

A quality study, not a timing one. Data that ship inside packages:
scikit-learn's breast cancer (569 x 30, binary) and wine (178 x 13, three
classes), statsmodels' ``fair`` (6,366 x 8; label: affairs > 0). For each of
8 seeds: a stratified 70/30 split, features standardised on the training
part, the training labels corrupted, every model fitted on them, and
everything judged against the CLEAN labels (test accuracy and log loss) and
the clean-data fit (a Laplace logistic fit on the clean training labels,
``prior_scale="auto"``).

Noise kinds (a share ``rate`` of the training rows, 10%, 20%, 30%):

- ``uniform``: random rows, each to a random other class;
- ``one-sided``: ``rate`` of the largest class's rows, to one fixed other
  class (class-conditional noise);
- ``near``: rows drawn with probability proportional to
  exp(-|m| / median |m|), m the clean fit's log-odds margin of the row's
  label against the next most probable class, to that class;
- ``far``: the rows the clean fit is most sure of (largest m), to the next
  most probable class.

Models: ``laplace auto`` and ``laplace s=1`` (``LaplaceLogisticClassifier``,
prior "auto" and 1.0), ``tempered t1/t2`` (``TemperedLogisticClassifier``,
prior_scale 1.0, its default; it has no evidence to choose one) on a grid
with t2 > 1 alone, t1 < 1 alone and both, and ``labelflip s=1``
(``LabelFlipLogisticClassifier``, flip rate "auto" at prior_scale 1.0: the
joint "auto" search of both, about 280 fits, would take the full run past
10 minutes). All on standardised features.

Measures: clean-test accuracy and log loss; cosine and relative error of the
slopes against the clean-data fit; coverage of the clean-data slopes by the
90% intervals (Laplace and label-flip); flip detection on the training rows
by average precision and precision at k (k = rows flipped) of each model's
doubt score: -log P(recorded label) for Laplace, ``label_doubt`` for the
tempered model (the same quantity under its tempered softmax; what the
accessor's ``doubtful_labels`` uses), ``flip_probability`` for the
label-flip model.

Usage: ``python benchmarks/bench_label_noise.py [--quick] [--csv PATH]``
(``--quick``: 2 seeds, rate 20% only). ``run(quick)`` gives the suite
runner two timing rows (label-flip against Laplace fits on one corrupted
data set), not the study.
"""

import argparse
import time
import warnings

import numpy as np
import pandas as pd
from sklearn.datasets import load_breast_cancer, load_wine
from sklearn.metrics import accuracy_score, average_precision_score, log_loss
from sklearn.model_selection import train_test_split
from sklearn.preprocessing import StandardScaler

from skbayeslogit import (
    LabelFlipLogisticClassifier,
    LaplaceLogisticClassifier,
    TemperedLogisticClassifier,
)

KINDS = ("uniform", "one-sided", "near", "far")
RATES = (0.1, 0.2, 0.3)
SEEDS = 8
TEMPERATURES = ((1.0, 1.5), (0.8, 1.0), (0.6, 1.0), (0.8, 1.2))
# Fixed prior scale on the standardised features for the tempered model (it
# has no evidence) and the label-flip model (its joint search of scale and
# rate, about 280 fits, would take the full run past 10 minutes); Laplace is
# run at this scale and at "auto".
PRIOR_SCALE = 1.0


def load_datasets():
    """(name, X, y) of the three data sets; y as integer codes."""
    out = []
    for name, loader in (("cancer", load_breast_cancer), ("wine", load_wine)):
        X, y = loader(return_X_y=True)
        out.append((name, X.astype(float), y.astype(int)))
    import statsmodels.api as sm

    fair = sm.datasets.fair.load_pandas().data
    y = (fair["affairs"] > 0).to_numpy().astype(int)
    X = fair.drop(columns="affairs").to_numpy(dtype=float)
    out.append(("fair", X, y))
    return out


def make_models():
    """Label -> unfitted estimator."""
    models = {
        "laplace auto": LaplaceLogisticClassifier(),
        "laplace s=1": LaplaceLogisticClassifier(prior_scale=PRIOR_SCALE),
    }
    for t1, t2 in TEMPERATURES:
        models[f"tempered {t1:g}/{t2:g}"] = TemperedLogisticClassifier(
            t1=t1, t2=t2, prior_scale=PRIOR_SCALE
        )
    models["labelflip s=1"] = LabelFlipLogisticClassifier(prior_scale=PRIOR_SCALE)
    return models


def _margins(P, y):
    """Log-odds of each row's label against its most probable other class, and that class."""
    rows = np.arange(len(y))
    other = P.copy()
    other[rows, y] = -np.inf
    runner_up = np.argmax(other, axis=1)
    tiny = np.finfo(float).tiny
    margin = np.log(np.maximum(P[rows, y], tiny)) - np.log(np.maximum(P[rows, runner_up], tiny))
    return margin, runner_up


def corrupt(y, kind, rate, P_clean, rng):
    """Noisy labels and the mask of flipped rows.

    Parameters
    ----------
    y : ndarray (n,), clean integer labels
    kind : one of KINDS
    rate : float
    P_clean : ndarray (n, K), the clean fit's probabilities on these rows
    rng : numpy Generator
    """
    n, K = P_clean.shape
    margin, runner_up = _margins(P_clean, y)
    y_new = y.copy()
    if kind == "uniform":
        rows = rng.choice(n, size=round(rate * n), replace=False)
        y_new[rows] = (y[rows] + rng.integers(1, K, size=len(rows))) % K
    elif kind == "one-sided":
        big = np.argmax(np.bincount(y, minlength=K))
        members = np.flatnonzero(y == big)
        rows = rng.choice(members, size=round(rate * len(members)), replace=False)
        y_new[rows] = (big + 1) % K
    elif kind == "near":
        scale = np.median(np.abs(margin))
        weight = np.exp(-np.abs(margin) / scale)
        rows = rng.choice(n, size=round(rate * n), replace=False, p=weight / weight.sum())
        y_new[rows] = runner_up[rows]
    elif kind == "far":
        rows = np.argsort(-margin, kind="stable")[: round(rate * n)]
        y_new[rows] = runner_up[rows]
    else:
        raise ValueError(f"unknown noise kind {kind!r}")
    return y_new, y_new != y


def _slopes(model):
    W = np.array(model.coef_, dtype=float)
    return W - W.mean(axis=0) if W.shape[0] > 1 else W


def _doubt(model, X, y):
    # The label-flip model's label_doubt ranks rows as flip_probability does
    # when flip_rate_ > 0, and still ranks them when the fitted rate is 0.
    if hasattr(model, "label_doubt"):
        return model.label_doubt(X, y)
    P = model.predict_proba(X)
    return -np.log(np.maximum(P[np.arange(len(y)), y], np.finfo(float).tiny))


def _coverage(model, clean_W):
    """Share of the clean fit's slopes inside the model's 90% intervals, or NaN."""
    if not hasattr(model, "coef_table"):
        return np.nan
    table = model.coef_table(level=0.9)
    n_slopes = clean_W.size
    lower = table["lower"].to_numpy()[:n_slopes]
    upper = table["upper"].to_numpy()[:n_slopes]
    truth = clean_W.ravel()
    return float(np.mean((lower <= truth) & (truth <= upper)))


def evaluate(model, split, clean_W, y_noisy, flipped):
    """Measures of one fitted model (a dict)."""
    X_tr, X_te, _, y_te = split
    P = model.predict_proba(X_te)
    K = P.shape[1]
    W = _slopes(model)
    ref = clean_W - clean_W.mean(axis=0) if clean_W.shape[0] > 1 else clean_W
    cos = float(np.sum(W * ref) / (np.linalg.norm(W) * np.linalg.norm(ref)))
    score = _doubt(model, X_tr, y_noisy)
    k = int(flipped.sum())
    top = np.argsort(-score, kind="stable")[:k]
    return {
        "accuracy": accuracy_score(y_te, np.argmax(P, axis=1)),
        "log_loss": log_loss(y_te, P, labels=np.arange(K)),
        "cosine": cos,
        "rel_error": float(np.linalg.norm(W - ref) / np.linalg.norm(ref)),
        "coverage90": _coverage(model, clean_W),
        "flip_ap": average_precision_score(flipped, score) if k else np.nan,
        "flip_prec_at_k": float(np.mean(flipped[top])) if k else np.nan,
    }


def one_seed(name, X, y, seed, rates, models):
    """Result rows (dicts) of every noise kind, rate and model for one seed."""
    X_tr, X_te, y_tr, y_te = train_test_split(X, y, test_size=0.3, stratify=y, random_state=seed)
    scaler = StandardScaler().fit(X_tr)
    X_tr, X_te = scaler.transform(X_tr), scaler.transform(X_te)
    clean = LaplaceLogisticClassifier().fit(X_tr, y_tr)
    clean_W = np.array(clean.coef_)
    P_clean = clean.predict_proba(X_tr)
    rows = []
    for kind in KINDS:
        for rate in rates:
            rng = np.random.default_rng([seed, KINDS.index(kind), int(rate * 100)])
            y_noisy, flipped = corrupt(y_tr, kind, rate, P_clean, rng)
            for label, est in models.items():
                t0 = time.perf_counter()
                model = est.__class__(**est.get_params()).fit(X_tr, y_noisy)
                fit_s = time.perf_counter() - t0
                measures = evaluate(model, (X_tr, X_te, y_tr, y_te), clean_W, y_noisy, flipped)
                extra = {"flip_rate_fitted": getattr(model, "flip_rate_", np.nan)}
                rows.append(
                    dict(data=name, seed=seed, kind=kind, rate=rate, model=label, fit_s=fit_s)
                    | measures
                    | extra
                )
    return rows


def study(quick=False):
    """All result rows as a DataFrame (one row per data set, seed, kind, rate, model)."""
    seeds = range(2 if quick else SEEDS)
    rates = (0.2,) if quick else RATES
    models = make_models()
    rows = []
    with warnings.catch_warnings():
        # Edge-of-range and convergence notes of single fits; the figures
        # below are what the study reports.
        warnings.simplefilter("ignore")
        for name, X, y in load_datasets():
            for seed in seeds:
                rows += one_seed(name, X, y, seed, rates, models)
    return pd.DataFrame(rows)


def summarise(frame, by=("kind", "rate", "model")):
    """Means over seeds (and data sets unless ``by`` includes ``data``)."""
    cols = [
        "accuracy",
        "log_loss",
        "cosine",
        "rel_error",
        "coverage90",
        "flip_ap",
        "flip_prec_at_k",
        "fit_s",
    ]
    return frame.groupby(list(by), sort=False)[cols].mean()


def run(quick=False):
    """Suite rows: label-flip against Laplace fit time on cancer, 20% uniform flips."""
    from _common import make_row

    name, X, y = load_datasets()[0]
    X = StandardScaler().fit_transform(X)
    rng = np.random.default_rng(0)
    P = LaplaceLogisticClassifier().fit(X, y).predict_proba(X)
    y_noisy, _ = corrupt(y, "uniform", 0.2, P, rng)
    rows = []
    for label, est in (
        ("labelflip auto/auto", LabelFlipLogisticClassifier()),
        ("labelflip rho 0.2", LabelFlipLogisticClassifier(flip_rate=0.2)),
    ):
        ref = LaplaceLogisticClassifier()
        times = {}
        for key, model in (("ours", est), ("ref", ref)):
            model.fit(X, y_noisy)  # warm-up (compilation)
            t0 = time.perf_counter()
            for _ in range(1 if quick else 3):
                model.fit(X, y_noisy)
            times[key] = (time.perf_counter() - t0) / (1 if quick else 3)
        rows.append(
            make_row(
                f"label noise fit: {label}, cancer 20% flips",
                times["ours"],
                "LaplaceLogisticClassifier auto",
                times["ref"],
                notes=f"flip_rate_ {est.flip_rate_:.3f}; quality figures: main()",
            )
        )
    return rows


def main(argv=None):
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--quick", action="store_true", help="2 seeds, rate 20% only")
    parser.add_argument("--csv", default=None, help="write every result row here")
    args = parser.parse_args(argv)
    t0 = time.perf_counter()
    frame = study(quick=args.quick)
    if args.csv:
        frame.to_csv(args.csv, index=False)
    pd.set_option("display.width", 200)
    pd.set_option("display.max_rows", 500)
    print(summarise(frame).round(3).to_string())
    print()
    print(summarise(frame, ("data", "kind", "model")).round(3).to_string())
    print(f"\nwall time {time.perf_counter() - t0:.0f} s")


if __name__ == "__main__":
    main()
