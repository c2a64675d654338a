"""The orchard simulation: argument checks, measurements, labels and their corruption.

See the package docstring of :mod:`skbayeslogit.datasets` for the scenario.
"""

import numbers

import numpy as np
from scipy.special import softmax

from ._truth import linear_predictor, margins, to_standard_scale, truth_record

ORCHARDS = ("Hillcrest", "Riverbend", "Old Mill", "Cedar Slope", "North Terrace")
# Per-block shifts give the orchard column a real association with the
# measurements (and so, marginally, with the grade) while the grade stays
# independent of it given the measurements.
ORCHARD_DAY_SHIFT = (-4.0, 0.0, 3.0, -1.0, 5.0)
ORCHARD_MASS_SHIFT = (10.0, -5.0, 0.0, 15.0, -12.0)


def check_n_lots(n_lots):
    if isinstance(n_lots, bool) or not isinstance(n_lots, numbers.Real):
        raise TypeError(f"n_lots must be an integer, got {n_lots!r}.")
    if not isinstance(n_lots, numbers.Integral):
        if not (np.isfinite(n_lots) and float(n_lots).is_integer()):
            raise ValueError(f"n_lots must be a whole number, got {n_lots!r}.")
    n = int(n_lots)
    if n < 10:
        raise ValueError(f"n_lots must be at least 10, got {n}.")
    return n


def check_share(value, name):
    if isinstance(value, bool) or not isinstance(value, numbers.Real):
        raise TypeError(f"{name} must be a number in [0, 1), got {value!r}.")
    value = float(value)
    if not (0.0 <= value < 1.0):
        raise ValueError(f"{name} must lie in [0, 1), got {value!r}.")
    return value


def check_params(n_lots, n_classes, flip_far, flip_near):
    n = check_n_lots(n_lots)
    if isinstance(n_classes, bool) or n_classes not in (2, 3):
        raise ValueError(f"n_classes must be 2 or 3, got {n_classes!r}.")
    far = check_share(flip_far, "flip_far")
    near = check_share(flip_near, "flip_near")
    return n, int(n_classes), far, near


def check_random_state(random_state):
    if random_state is None:
        return np.random.default_rng(), None
    if isinstance(random_state, np.random.Generator):
        return random_state, None
    if isinstance(random_state, numbers.Integral) and not isinstance(random_state, bool):
        seed = int(random_state)
        if seed < 0:
            raise ValueError(f"random_state must be non-negative, got {seed}.")
        return np.random.default_rng(seed), seed
    raise TypeError(
        "random_state must be None, a non-negative int or a numpy.random.Generator, "
        f"got {random_state!r}."
    )


def draw_measurements(n, rng):
    """Correlated intake measurements, already rounded to recording precision.

    Returns
    -------
    orchard : ndarray of shape (n,), int
        Orchard block codes in ``[0, 5)``.
    M : ndarray of shape (7, n), float64
        One row per feature, in the order of ``FEATURES``, original scale.
        Feature-major because every consumer reads whole columns.
    """
    orchard = rng.integers(0, len(ORCHARDS), size=n)
    # The seven noise rows are turned into the seven measurements in place:
    # at a million lots, fresh temporaries cost more than the arithmetic.
    M = rng.standard_normal((7, n))
    firmness, brix, starch, days, mass, bruise, temp = M
    ripeness = rng.standard_normal(n)

    np.multiply(days, 9.0, out=days)
    days += 145.0
    days += np.asarray(ORCHARD_DAY_SHIFT)[orchard]
    np.clip(np.rint(days, out=days), 120, 170, out=days)

    # Ripeness tracks the calendar but not exactly (site and weather).
    ripeness *= 0.6
    ripeness += (days - 145.0) / 9.0

    starch *= 0.8
    starch += 4.5 + 1.3 * ripeness
    np.clip(np.rint(starch, out=starch), 1, 8, out=starch)

    mass *= 25.0
    mass += 190.0
    mass += np.asarray(ORCHARD_MASS_SHIFT)[orchard]
    np.clip(np.rint(mass, out=mass), 120, 260, out=mass)

    firmness *= 5.0
    firmness += 71.0 - 5.0 * ripeness - 0.04 * (mass - 190.0)
    np.clip(np.round(firmness, 1, out=firmness), 50.0, 90.0, out=firmness)

    brix *= 0.9
    brix += 13.0 + 0.6 * ripeness
    np.clip(np.round(brix, 1, out=brix), 10.0, 16.0, out=brix)

    bruise[:] = rng.gamma(1.5, 2.0 * np.exp(0.15 * ripeness))
    np.clip(np.round(bruise, 1, out=bruise), 0.0, 15.0, out=bruise)

    temp *= 3.5
    temp += 14.0
    np.clip(np.round(temp, 1, out=temp), 2.0, 28.0, out=temp)
    return orchard, M


def split_halves(gap):
    """Far and near halves of the rows by distance to the boundary.

    Parameters
    ----------
    gap : ndarray of shape (n,)

    Returns
    -------
    far, near : ndarray of int
        Sorted row indices; ``far`` holds the ``n // 2`` largest gaps (ties
        broken by row order).
    """
    order = np.argsort(-gap, kind="stable")
    half = gap.size // 2
    return np.sort(order[:half]), np.sort(order[half:])


def flip_counts(n, flip_far, flip_near):
    """Exact numbers of far and near flips for ``n`` rows."""
    n_far = n // 2
    return round(flip_far * n_far), round(flip_near * (n - n_far))


def simulate(n, n_classes, flip_far, flip_near, rng):
    truth = truth_record(n_classes)
    orchard, M = draw_measurements(n, rng)
    eta = linear_predictor(to_standard_scale(M, truth), truth)
    prob = softmax(eta, axis=1)

    u = rng.random(n)
    # Inverse-CDF draw; the last class also catches u beyond a rounded cumsum.
    y_clean = np.minimum((u[:, None] >= np.cumsum(prob, axis=1)).sum(axis=1), n_classes - 1)

    margin, gap = margins(eta, y_clean)
    k_far, k_near = flip_counts(n, flip_far, flip_near)
    far_half, near_half = split_halves(gap)
    confident = far_half[margin[far_half] > 0]
    # Almost every far-half row agrees with the truth; should too few do,
    # the rest of the half makes up the count.
    pool = confident if confident.size >= k_far else far_half
    far = np.sort(rng.choice(pool, size=k_far, replace=False))
    near = np.sort(rng.choice(near_half, size=k_near, replace=False))

    y = y_clean.copy()
    flipped = np.concatenate([far, near])
    y[flipped] = (y_clean[flipped] + rng.integers(1, n_classes, size=flipped.size)) % n_classes
    return {
        "truth": truth,
        "orchard": orchard,
        "M": M,
        "y": y,
        "y_clean": y_clean,
        "far": far,
        "near": near,
    }


def lot_ids(n):
    width = max(4, len(str(n)))
    return [f"L{i:0{width}d}" for i in range(1, n + 1)]
