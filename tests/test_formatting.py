"""How the report writes numbers: significant digits and exact level labels.

The expected strings are what the issue asks for (issue 19: "--level 0.975
prints 98%" was the defect) and ordinary decimal arithmetic, worked by hand.
"""

import numpy as np
import pandas as pd
import pytest

from skbayeslogit._frame.formatting import format_frame, level_label, significant


@pytest.mark.parametrize(
    "level, label",
    [
        (0.8, "80%"),
        (0.9, "90%"),
        (0.95, "95%"),
        (0.975, "97.5%"),
        (0.99, "99%"),
        (0.995, "99.5%"),
        (0.999, "99.9%"),
        (0.6827, "68.27%"),
    ],
)
def test_level_labels_keep_every_digit(level, label):
    assert level_label(level) == label


@pytest.mark.parametrize(
    "value, text",
    [
        (0.0004213, "0.000421"),  # a per-unit coefficient must not read -0.000
        (-0.0004213, "-0.000421"),
        (0.0012, "0.0012"),
        (0.98765, "0.988"),
        (1.5, "1.5"),
        (12.345, "12.3"),
        (123.45, "123"),
        (98765.4, "98765"),
        (42, "42"),
        (np.int64(7), "7"),
        (0.0, "0"),
        (3.2e-7, "3.20e-07"),
        (float("nan"), "-"),
        (None, "-"),
        (float("inf"), "inf"),
    ],
)
def test_significant_digits(value, text):
    assert significant(value) == text


def test_rounded_probability_stays_inside_its_rounded_interval():
    # The defect of issue 19: 0.001 [0.000, 0.000] at three decimals.
    p, lo, hi = 0.00123, 0.000412, 0.00297
    shown = [float(significant(v)) for v in (p, lo, hi)]
    assert shown[1] <= shown[0] <= shown[2]


def test_frame_columns_integers_as_integers_and_text_kept():
    frame = pd.DataFrame(
        {
            "count": [3.0, 40.0, np.nan],  # whole numbers read as float (a missing cell)
            "estimate": [0.00042, -1.23456, 12.0],
            "label": ["a", None, "c"],
        }
    )
    shown = format_frame(frame)
    assert shown["count"].tolist() == ["3", "40", "-"]
    assert shown["estimate"].tolist() == ["0.00042", "-1.23", "12"]
    assert shown["label"].tolist() == ["a", "-", "c"]
    # The caller's frame is not modified.
    assert frame["count"].dtype == float
