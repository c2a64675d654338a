"""The report's findings in plain sentences, built from its numbers.

Each function turns one result into one or two sentences; the report puts
them first, in the terminal and on the page. Numbers are written with
:mod:`~skbayeslogit._frame.formatting` (significant digits, exact level
labels).
"""

import numpy as np

from .evaluation import scores
from .formatting import level_label, significant

#: A column is named as mattering when its Bayes factor for "no effect" is at
#: most 10^-0.5, the "substantial" step of Kass & Raftery's scale (JASA 90,
#: 1995, p. 777).
EFFECT_LOG10_BF = -0.5

#: Label sets simulated from the probabilities for the calibration check.
CALIBRATION_DRAWS = 200


def strongest_columns(evidence):
    """Columns with (at least substantial) evidence of an effect, strongest first.

    Parameters
    ----------
    evidence : pandas.DataFrame
        A model's ``column_evidence()`` table (``log10_bf_no_effect``).

    Returns
    -------
    list of str
    """
    found = evidence[evidence["log10_bf_no_effect"] <= EFFECT_LOG10_BF]
    return [str(c) for c in found.sort_values("log10_bf_no_effect").index]


def _direction(coefficients, column, positive):
    """How a one-parameter column moves the positive class (binary), or None."""
    if positive is None or column not in coefficients.index:
        return None
    estimate = float(coefficients.loc[column, "estimate"])
    way = "more" if estimate > 0 else "less"
    return f"higher values make {positive} {way} likely"


def _favoured(coefficients, column):
    """Multiclass: the classes a higher value favours most and least, or None.

    Only differences between classes' coefficients are identified, so the
    statement compares the largest with the smallest.
    """
    if coefficients.index.nlevels != 2:
        return None
    slopes = coefficients["estimate"].xs(column, level=1, drop_level=True)
    if len(slopes) < 2:
        return None
    return f"higher values favour {slopes.idxmax()} over {slopes.idxmin()}"


def _spread(coefficients, column, level):
    """The coefficient's credible interval per standard deviation, or None."""
    if column not in coefficients.index or "lower" not in coefficients.columns:
        return None
    row = coefficients.loc[column]
    return (
        f"{level_label(level)} interval {significant(row['lower'])} to "
        f"{significant(row['upper'])} per standard deviation"
    )


def _numeric_in(coefficients, column):
    """Whether ``column`` is one parameter per class of a multiclass table."""
    return coefficients.index.nlevels == 2 and column in coefficients.index.get_level_values(1)


def column_sentences(evidence, coefficients, level, positive=None):
    """Which columns matter, strongest first, with direction and interval.

    Parameters
    ----------
    evidence : pandas.DataFrame
        ``column_evidence()`` of the model summarised.
    coefficients : pandas.DataFrame
        Its coefficient table (features standardised), turned to the
        positive class (binary); multiclass tables have no single direction.
    level : float
    positive : label or None
        The positive class of a binary target.

    Returns
    -------
    list of str
    """
    strong = strongest_columns(evidence)
    binary = positive is not None and coefficients.index.nlevels == 1
    if not strong:
        return [
            "No column shows substantial evidence of an effect (Bayes factor, Kass & "
            "Raftery's scale): the labels are not well explained by these columns."
        ]
    parts = []
    for column in strong:
        words = str(evidence.loc[column, "evidence"]).replace(" evidence of an effect", "")
        details = [words]
        if binary and int(evidence.loc[column, "n_parameters"]) == 1:
            found = (
                _direction(coefficients, column, positive),
                _spread(coefficients, column, level),
            )
            details += [d for d in found if d is not None]
        elif _numeric_in(coefficients, column):
            details.append(_favoured(coefficients, column) or "effect differs by class")
        elif int(evidence.loc[column, "n_parameters"]) > 1:
            details.append("effect differs by level")
        parts.append(f"{column} ({'; '.join(details)})")
    sentences = [
        "Columns that matter, strongest evidence first (Bayes factor against no effect): "
        + ", ".join(parts)
        + "."
    ]
    none = evidence[evidence["log10_bf_no_effect"] >= -EFFECT_LOG10_BF].index
    if len(none):
        sentences.append(
            "Evidence of no effect: " + ", ".join(map(str, none)) + "; the other columns are "
            "undecided."
        )
    return sentences


def interval_sentence(predictions, level):
    """How wide the predicted probabilities' credible intervals typically are, or None."""
    lower = [c for c in predictions.columns if c.startswith("prob_") and c.endswith("_lower")]
    if not lower:
        return None
    widths = np.concatenate(
        [predictions[c.removesuffix("_lower") + "_upper"] - predictions[c] for c in lower]
    )
    return (
        f"How sure: the {level_label(level)} credible interval of a predicted probability is "
        f"typically {significant(float(np.median(widths)))} wide (median over rows; widest "
        f"{significant(float(np.max(widths)))})."
    )


def comparison_sentence(comparison):
    """Which model did best held out, by log loss, and by how much."""
    if len(comparison) < 2:
        only = comparison.index[0]
        return (
            f"Held out (cross-validation), {only} has log loss "
            f"{significant(comparison.loc[only, 'log_loss'])} and accuracy "
            f"{significant(comparison.loc[only, 'accuracy'])}."
        )
    ranked = comparison.sort_values("log_loss")
    best, second = ranked.index[0], ranked.index[1]
    gap = float(ranked.loc[second, "log_loss"] - ranked.loc[best, "log_loss"])
    sd = float(ranked.loc[best, "log_loss_sd"]) if "log_loss_sd" in ranked else float("nan")
    tie = (
        "a difference smaller than the spread across folds, so the models are practically tied"
        if np.isfinite(sd) and gap < sd
        else "a difference larger than the spread across folds"
    )
    return (
        f"Best held out (cross-validated log loss): {best} "
        f"({significant(ranked.loc[best, 'log_loss'])}), {significant(gap)} below {second}; "
        f"{tie} (fold sd {significant(sd)}). Accuracy of {best}: "
        f"{significant(ranked.loc[best, 'accuracy'])}."
    )


def calibration_check(P, codes, positive, seed):
    """Expected calibration error of ``P`` and how often calibrated probabilities reach it.

    Consistency resampling (Broecker & Smith, "Increasing the reliability of
    reliability diagrams", Weather and Forecasting 22, 2007): labels are
    drawn from the probabilities themselves, as if they were calibrated,
    and the share of such label sets whose error is at least the observed
    one is the tail probability.

    Parameters
    ----------
    P : ndarray of shape (n, K)
    codes : ndarray of shape (n,), int
    positive : int or None
        Index of the positive class (binary).
    seed : int

    Returns
    -------
    ece : float
    tail : float
        Share of the simulated label sets with an error >= ``ece``.
    """
    P = np.asarray(P, dtype=np.float64)
    index = 1 if positive is None else positive
    ece = scores(P, codes, positive=index)["ece"]
    rng = np.random.default_rng(seed)
    cumulative = np.cumsum(P, axis=1)
    cumulative[:, -1] = 1.0
    reached = 0
    for _ in range(CALIBRATION_DRAWS):
        u = rng.random(len(P))[:, None]
        drawn = np.argmax(u < cumulative, axis=1)
        reached += scores(P, drawn, positive=index)["ece"] >= ece
    return ece, reached / CALIBRATION_DRAWS


def calibration_sentence(ece, tail, source):
    """The calibration verdict from :func:`calibration_check`."""
    verdict = (
        "larger than calibrated probabilities would often give: treat the probabilities "
        "as rough and check the calibration table"
        if tail < 0.05
        else "within what calibrated probabilities give by chance"
    )
    return (
        f"Calibration ({source}): expected calibration error {significant(ece)}; "
        f"{significant(100 * tail)}% of label sets drawn from the probabilities themselves "
        f"reach it, so the error is {verdict}."
    )


def doubtful_sentence(doubtful, top, model_name, ground_truth=None):
    """How many rows to re-check, and why."""
    n = len(doubtful)
    if n == 0:
        return (
            f"Rows to re-check: none; the {model_name} model finds every recorded label probable."
        )
    shown = min(n, top)
    text = (
        f"Rows to re-check: {n} of {doubtful.attrs.get('n_rows', n)} rows have a recorded "
        f"label the {model_name} model finds improbable (another class is more probable "
        "once every class is counted as equally common, so a class is not listed merely "
        f"for being rare); the {shown} with the highest odds against their label are listed "
        "first. A prompt to re-check the records, not a verdict."
    )
    if ground_truth is not None and ground_truth.get("top_hits") is not None:
        text += (
            f" Demo ground truth: {ground_truth['top_hits']} of these {shown} were "
            f"deliberately mislabelled ({ground_truth['flipped']} rows were in all)."
        )
    return text


def separation_sentence(classes, n_classes):
    """The warning for separated classes, or None.

    Parameters
    ----------
    classes : list of str
        Classes a hyperplane separates from the others (binary: one entry).
    n_classes : int
    """
    if not classes:
        return None
    if n_classes == 2:
        which = "the two classes are"
    else:
        which = f"class(es) {', '.join(classes)} are"
    return (
        f"Warning: {which} (quasi-)completely separated by the columns: without a prior "
        "the coefficients would grow without bound. Their size along the separating "
        "direction, and its intervals, are set by the prior, not by the data; read them "
        "as 'large', and expect probabilities of new rows near 0 or 1 to be overconfident."
    )


def edge_sentence(models):
    """The warning for a prior scale chosen at the edge of its search, or None."""
    if not models:
        return None
    return (
        f"Warning: for {', '.join(models)}, the evidence was still rising at the largest "
        "prior scale searched, as it does with separated classes; the prior scale is that "
        "edge, and the intervals depend on it. Consider passing a prior scale."
    )


def floor_sentence(models):
    """The note for a prior scale at the bottom of its search, or None."""
    if not models:
        return None
    return (
        f"Warning: for {', '.join(models)}, the evidence prefers the smallest prior scale "
        "searched: the data support no slope at all, every coefficient is pulled to zero, "
        "and the labels look unrelated to these columns."
    )


def approximation_sentence(verdict, corrected):
    """The summary's line on the Laplace approximation check (Pareto-smoothed
    importance sampling), from its verdict; None when no check ran."""
    if verdict is None:
        return None
    if corrected is None:
        return f"Approximation check: {verdict}"
    return (
        f"Warning: approximation check: {verdict} The coefficient table corrected by the "
        "check's weighted draws is shown after the coefficients (and in "
        "coefficients_corrected.csv)."
    )


def _summarised_model(report):
    """The model whose column evidence the summary reads: the primary, else the first with one."""
    if report.primary in report.column_evidence:
        return report.primary
    return next(iter(report.column_evidence), None)


def findings(report, fits, held_out, seed):
    """The Summary section: the report's findings as plain sentences.

    Parameters
    ----------
    report : Report
        Built but for its summary.
    fits : Fits
        The classes a hyperplane separates (``separated_classes``) and the
        models whose prior scale is at the top or bottom of its search
        (``at_edge``, ``at_floor``).
    held_out : tuple or None
        The primary model's out-of-fold probabilities (n, K), the recorded
        labels' class indices (n,) and the positive class's index (binary;
        None for multiclass): the arguments of :func:`calibration_check`.
    seed : int
        Seeds the calibration check.

    Returns
    -------
    list of str
    """
    sentences = []
    name = _summarised_model(report)
    if name is not None and name in fits.at_edge:
        sentences.append(
            f"Column evidence ({name}) is not informative here: its prior scale sits at the "
            "edge of the search, and with so wide a prior a Bayes factor favours 'no effect' "
            "whatever the data (Lindley's paradox). Read the coefficient tables instead."
        )
    elif name is not None:
        positive = report.coefficients[name].attrs.get("positive_class")
        if len(report.classes) != 2:
            positive = None
        sentences += column_sentences(
            report.column_evidence[name], report.coefficients[name], report.level, positive
        )
        if name != report.primary:
            sentences[-1] += f" (Evidence from the {name} model.)"
    sentences.append(interval_sentence(report.predictions, report.level))
    sentences.append(comparison_sentence(report.comparison))
    if held_out is not None:
        ece, tail = calibration_check(*held_out, seed)
        sentences.append(
            calibration_sentence(ece, tail, f"{report.primary}, held-out probabilities")
        )
    sentences.append(
        doubtful_sentence(
            report.doubtful, report.top, report.doubtful.attrs.get("model", ""),
            report.ground_truth,
        )
    )  # fmt: skip
    sentences.append(separation_sentence(fits.separated_classes, len(report.classes)))
    sentences.append(edge_sentence(fits.at_edge))
    sentences.append(floor_sentence(fits.at_floor))
    sentences.append(
        approximation_sentence(report.approximation_verdict, report.corrected_coefficients)
    )
    return [s for s in sentences if s]
