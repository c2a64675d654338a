"""The Bayesian reference a user would otherwise run: PyMC NUTS vs Laplace.

Model, the same on both sides: binary logistic regression on the demo data
(``skbayeslogit.datasets.make_orchard_lots(n)``, label ``long_storage``; the
seven measurements in ``df.attrs["features"]`` standardised with their sample
mean and sd, ddof = 0), slopes ~ N(0, PRIOR_SCALE^2) independently, a flat
(improper uniform) prior on the intercept: ours
``LaplaceLogisticClassifier(prior_scale=PRIOR_SCALE)`` (its default
``intercept_prior_scale=None`` is the flat prior), PyMC ``pm.Normal`` slopes
and ``pm.Flat`` intercept with a ``pm.Bernoulli(logit_p=...)`` likelihood.

Sampler: NUTS (PyMC's default, target_accept 0.8), 4 chains, 5,000 tuning
and 5,000 kept draws each, ``cores=2`` (two chains at a time on this 2-core
machine), on n = 400 (the demo scenario) and n = 10,000. The quick run does
n = 400 only with 1,000 + 1,000 draws per chain (agreement figures are then
noisier).

Figures:

- wall time: our fit (validation, MAP, covariance, evidence), median of
  repeats, against PyMC's sampling time (``idata.posterior.attrs
  ["sampling_time"]``: tuning + draws, excluding compilation, so the ratio
  is conservative); the notes also give the total of model build +
  compilation + sampling. Target (issue 7): ours / MCMC <= 1e-3 (Laplace at
  least 1,000x faster).
- agreement, each difference divided by the MCMC posterior sd of the same
  quantity: posterior means of the 8 parameters; 90% equal-tailed interval
  end points (ours m +- 1.645 s against the MCMC 5% / 95% quantiles);
  predictive probabilities P(long_storage | x) on 144 new cases (a sweep of
  each feature over -2..2 sd with the others at 0, 7 x 9, plus a 9 x 9 grid
  of firmness x bruise share), ours ``predict_proba`` (moderated, the
  default) against the MCMC mean of sigmoid(eta), in units of the MCMC sd of
  sigmoid(eta). The notes give the largest and the median absolute value,
  the largest R-hat and the smallest bulk ESS.

Where PyMC runs: PyMC is an optional benchmark dependency, never a runtime
one. PyMC 5.28 needs pytensor 2.38, which pins ``numba<=0.65.1``; installed
into the project's environment it would downgrade the numba 0.68 the package
is developed on. So the sampler runs in a child interpreter: the one named by
the ``BENCH_MCMC_PYTHON`` environment variable (for example a venv made with
``python -m venv --system-site-packages V && V/bin/pip install pymc
numba==0.65.1 llvmlite==0.47.0``), else the current interpreter if it can
import pymc. When neither can, the rows say so and the rest of the suite runs.

Usage: ``python benchmarks/bench_mcmc.py [--quick]``.
"""

import argparse
import json
import os
import subprocess
import sys
import tempfile
import time
from pathlib import Path

import numpy as np

sys.path.insert(0, str(Path(__file__).resolve().parent))

from _common import print_table, time_call  # noqa: E402
from _suite_helpers import REPO, suite_row  # noqa: E402

PRIOR_SCALE = 1.0
LEVEL = 0.9
SPEED_TARGET = 1e-3
CHAINS = 4
CORES = 2

_CHILD = r"""
import json, sys, time, warnings
warnings.simplefilter('ignore')
import numpy as np
data = np.load(sys.argv[1])
cfg = json.loads(sys.argv[2])
t_import = time.perf_counter()
import arviz as az
import pymc as pm
import pytensor
t_import = time.perf_counter() - t_import
Z, y = data['Z'], data['y']
t0 = time.perf_counter()
with pm.Model():
    beta = pm.Normal('beta', mu=0.0, sigma=cfg['prior_scale'], shape=Z.shape[1])
    alpha = pm.Flat('alpha')
    pm.Bernoulli('y', logit_p=alpha + pm.math.dot(Z, beta), observed=y)
    idata = pm.sample(draws=cfg['draws'], tune=cfg['tune'], chains=cfg['chains'],
                      cores=cfg['cores'], random_seed=cfg['seed'], progressbar=False,
                      compute_convergence_checks=False)
total = time.perf_counter() - t0
post = idata.posterior
draws = np.concatenate([post['beta'].values, post['alpha'].values[..., None]], axis=-1)
summ = az.summary(idata, kind='diagnostics')
np.save(sys.argv[3], draws)
print('MCMC_JSON=' + json.dumps({
    'sampling_s': float(post.attrs.get('sampling_time', float('nan'))),
    'total_s': total, 'import_s': t_import,
    'rhat_max': float(summ['r_hat'].max()), 'ess_bulk_min': float(summ['ess_bulk'].min()),
    'divergences': int(idata.sample_stats['diverging'].values.sum()),
    'versions': f'pymc {pm.__version__}, pytensor {pytensor.__version__}',
}))
"""


def mcmc_python():
    """(interpreter, why) for the PyMC child; interpreter None when none works."""
    candidates = []
    if os.environ.get("BENCH_MCMC_PYTHON"):
        candidates.append(os.environ["BENCH_MCMC_PYTHON"])
    candidates.append(sys.executable)
    reasons = []
    for exe in candidates:
        try:
            proc = subprocess.run(
                [exe, "-c", "import pymc, pytensor; print(pymc.__version__)"],
                capture_output=True,
                text=True,
                timeout=300,
            )
        except (OSError, subprocess.TimeoutExpired) as exc:
            reasons.append(f"{exe}: {exc}")
            continue
        if proc.returncode == 0:
            return exe, ""
        tail = (proc.stderr.strip().splitlines() or ["?"])[-1]
        reasons.append(f"{exe}: {tail}")
    return None, "; ".join(reasons)


def demo_data(n):
    from skbayeslogit.datasets import make_orchard_lots

    df = make_orchard_lots(n)
    feats = list(df.attrs["features"])
    Xraw = df[feats].to_numpy(dtype=float)
    Z = (Xraw - Xraw.mean(axis=0)) / Xraw.std(axis=0)
    y = (df["storage_grade"] == "long_storage").to_numpy().astype(np.int64)
    return np.ascontiguousarray(Z), y, feats


def new_cases(feats):
    """144 standardised cases: 7 one-feature sweeps and a 9 x 9 grid."""
    d = len(feats)
    vals = np.linspace(-2.0, 2.0, 9)
    rows = []
    for j in range(d):
        for v in vals:
            z = np.zeros(d)
            z[j] = v
            rows.append(z)
    jf, jb = feats.index("firmness_n"), feats.index("bruise_share_pct")
    for a in vals:
        for b in vals:
            z = np.zeros(d)
            z[jf], z[jb] = a, b
            rows.append(z)
    return np.array(rows)


def sample_mcmc(exe, Z, y, draws, tune, seed=1):
    with tempfile.TemporaryDirectory(prefix="skbl_mcmc_") as tmp:
        data = Path(tmp) / "data.npz"
        out = Path(tmp) / "draws.npy"
        np.savez(data, Z=Z, y=y)
        cfg = {
            "prior_scale": PRIOR_SCALE,
            "draws": draws,
            "tune": tune,
            "chains": CHAINS,
            "cores": CORES,
            "seed": seed,
        }
        proc = subprocess.run(
            [exe, "-c", _CHILD, str(data), json.dumps(cfg), str(out)],
            capture_output=True,
            text=True,
            cwd=str(REPO),
            timeout=3600,
        )
        if proc.returncode != 0 or "MCMC_JSON=" not in proc.stdout:
            tail = " | ".join(proc.stderr.strip().splitlines()[-4:])
            raise RuntimeError(f"PyMC child failed (exit {proc.returncode}): {tail}")
        info = json.loads(proc.stdout.rsplit("MCMC_JSON=", 1)[1].splitlines()[0])
        info["draws"] = np.load(out)
    return info


def agreement(model, info, cases):
    """Standardised differences Laplace - MCMC (in MCMC sd units)."""
    from scipy.special import expit
    from scipy.stats import norm

    S = info["draws"].reshape(-1, info["draws"].shape[-1])  # (draws, p): beta..., alpha
    m_mc, s_mc = S.mean(axis=0), S.std(axis=0, ddof=1)
    lo_mc, hi_mc = np.quantile(S, [(1 - LEVEL) / 2, (1 + LEVEL) / 2], axis=0)
    m_la = model.posterior_mean_
    s_la = np.sqrt(np.diag(model.posterior_cov_))
    z = norm.ppf((1 + LEVEL) / 2)
    d_mean = (m_la - m_mc) / s_mc
    d_int = np.concatenate([(m_la - z * s_la - lo_mc) / s_mc, (m_la + z * s_la - hi_mc) / s_mc])
    P = expit(S[:, :-1] @ cases.T + S[:, -1:])  # (draws, cases)
    p_mc, p_sd = P.mean(axis=0), P.std(axis=0, ddof=1)
    p_la = model.predict_proba(cases)[:, 1]
    d_pred = (p_la - p_mc) / p_sd
    sd_ratio = s_la / s_mc
    return {
        "mean": d_mean,
        "interval": d_int,
        "pred": d_pred,
        "pred_abs": np.abs(p_la - p_mc),
        "sd_ratio": sd_ratio,
    }


def _stat(a):
    a = np.abs(a)
    return f"max {a.max():.3f}, median {np.median(a):.3f}"


def bench_one(exe, n, draws, tune):
    from skbayeslogit import LaplaceLogisticClassifier

    Z, y, feats = demo_data(n)
    cases = new_cases(feats)

    def fit():
        return LaplaceLogisticClassifier(prior_scale=PRIOR_SCALE).fit(Z, y)

    t_ours, times, model = time_call(fit, repeats=21, warmup=2)
    t0 = time.perf_counter()
    info = sample_mcmc(exe, Z, y, draws, tune)
    wall = time.perf_counter() - t0
    ag = agreement(model, info, cases)
    tag = f"n={n} {CHAINS}x({tune}+{draws}) cores={CORES}"
    judged = draws >= 5000 and tune >= 5000
    speed = suite_row(
        f"mcmc wall laplace fit vs PyMC NUTS {tag}",
        t_ours,
        "PyMC NUTS sampling",
        info["sampling_s"],
        target=f"ratio <= {SPEED_TARGET:g} (>= 1000x faster)"
        + ("" if judged else " (judged at 5000+5000)"),
        met=(lambda f: f <= SPEED_TARGET) if judged else None,
        notes=(
            f"speed-up {info['sampling_s'] / t_ours:,.0f}x on sampling time; "
            f"build+compile+sample {info['total_s']:.1f}s "
            f"({info['total_s'] / t_ours:,.0f}x), child wall incl. import {wall:.1f}s; "
            f"{info['versions']}; R-hat max {info['rhat_max']:.4f}, "
            f"bulk ESS min {info['ess_bulk_min']:.0f}, divergences {info['divergences']}"
        ),
    )
    rows = [speed]
    for key, what in (
        ("mean", "posterior means (8 params)"),
        ("interval", "90% interval end points (16)"),
        ("pred", "predictive P on 144 new cases"),
    ):
        extra = ""
        if key == "mean":
            extra = (
                f"; Laplace sd / MCMC sd {ag['sd_ratio'].min():.3f}..{ag['sd_ratio'].max():.3f}"
            )
        if key == "pred":
            extra = f"; max |dP| {ag['pred_abs'].max():.4f}"
        rows.append(
            suite_row(
                f"mcmc agreement {what} n={n}",
                None,
                "PyMC NUTS",
                None,
                figure=float(np.max(np.abs(ag[key]))),
                notes=f"|Laplace - MCMC| / MCMC sd: {_stat(ag[key])}{extra}",
            )
        )
    return rows


def run(quick=False):
    exe, why = mcmc_python()
    if exe is None:
        return [
            suite_row(
                "mcmc PyMC reference",
                None,
                "PyMC NUTS",
                None,
                notes=f"SKIPPED: no interpreter can import pymc ({why})",
            )
        ]
    if quick:
        plan = [(400, 1000, 1000)]
    else:
        plan = [(400, 5000, 5000), (10_000, 5000, 5000)]
    rows = []
    for n, draws, tune in plan:
        rows.extend(bench_one(exe, n, draws, tune))
    return rows


def main(argv=None):
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--quick", action="store_true", help="n = 400, 1,000 + 1,000 draws")
    args = parser.parse_args(argv)
    print_table(run(quick=args.quick))


if __name__ == "__main__":
    main()
