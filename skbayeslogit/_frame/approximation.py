"""The approximation self-check of a model on the rows of a frame.

A model with a Laplace posterior (laplace, probit) is checked on the frame's
rows it uses. One fitted through ``df.bayeslogit.fit`` is a FrameModel whose
final estimator sees the encoded columns, by default a
:class:`~skbayeslogit.standardized.StandardizedClassifier`: its wrapped
estimator, whose posterior it is, saw the standardised features, so it is
checked on those (the check's Pareto k does not depend on that linear
reparametrisation; the corrected ``coef_table`` is on the standardised
scale).
"""

from .fitting import fitted_on_frame
from .orientation import oriented_coefficients
from .posterior_view import check_on_rows

# Warnings point at the user's call: this module -> accessor method -> user.
_CALLER = 3


def approximation_check(df, target, model, dropna, options):
    """``check_approximation`` of ``model`` on ``target`` and its feature columns.

    ``options`` holds the keyword arguments ``n_draws``, ``random_state`` and
    ``refine`` the caller gave (the rest take the estimator's defaults).

    Returns
    -------
    ApproximationCheck
    """
    from .._approximation import CHECK_ARGUMENTS, DEFAULT_CHECK_DRAWS

    unknown = sorted(set(options) - set(CHECK_ARGUMENTS.constraints))
    if unknown:
        raise TypeError(
            f"check_approximation got unexpected argument(s) {', '.join(unknown)}; it takes "
            "n_draws, random_state and refine."
        )
    # Checked before a model given by name is fitted.
    values = {"n_draws": DEFAULT_CHECK_DRAWS, "random_state": None, "refine": False, **options}
    CHECK_ARGUMENTS.check_values(values)
    model, X, y, _ = fitted_on_frame(df, model, target, dropna, stacklevel=_CALLER + 1)
    # A FrameModel fitted with a weight column: the check's posterior is
    # that of the weighted fit.
    weights = model.row_weights(X) if hasattr(model, "row_weights") else None
    return check_on_rows(model, X, y, weights, values)


def approximation_verdict(check, model=None, level=0.9):
    """A plain-language verdict of an approximation check, and the corrected table if needed.

    Parameters
    ----------
    check : ApproximationCheck
        What ``check_approximation`` returned.
    model : fitted estimator or FrameModel, optional
        The model that was checked: a binary FrameModel's table is then
        turned to the log-odds of its ``positive_``, as its own
        ``coef_table`` is.
    level : float in (0, 1), default=0.9
        Credible level of the corrected table's bounds.

    Returns
    -------
    sentence : str
        Whether the fast (Laplace) posterior can be trusted, with the Pareto
        k against its threshold, the effective sample size and the largest
        change of a posterior mean (in Laplace posterior sd).
    table : pandas.DataFrame or None
        None when the check is reliable; otherwise the corrected
        coefficient table (importance-weighted, or the sampler's after
        ``refine``; a standardised model's on the standardised scale), with
        ``attrs["method"]`` naming how it was corrected.
    """
    k = f"Pareto k = {check.pareto_k:.2f}"
    shift = float(abs(check.mean_shift).max()) if len(check.mean_shift) else 0.0
    moved = f"the largest change of a posterior mean is {shift:.2f} sd"
    if check.reliable:
        return (
            f"The fast (Laplace) posterior agrees with the exact one: {k}, below the "
            f"threshold {check.threshold:.2f}; {moved}.",
            None,
        )
    head = (
        f"The fast (Laplace) posterior does not match the exact one: {k}, at or above the "
        f"threshold {check.threshold:.2f}, and {moved}"
    )
    if check.method == "sampler":
        worst = float(check.rhat.max())
        sentence = (
            f"{head}. The intervals below come from a sampler ({check.sampler_info['chains']} "
            f"chains, largest R-hat {worst:.3f}, smallest tail effective sample size "
            f"{float(check.ess_tail.min()):,.0f})."
        )
        if not worst < 1.01:
            sentence += " The sampler has not converged (R-hat >= 1.01): treat them with care."
    else:
        sentence = (
            f"{head}. The intervals below are corrected by importance sampling, but with an "
            f"effective sample size of {check.ess:,.0f} of {check.n_draws:,} draws they are "
            "rough; the check with refine=True gives sampler-based intervals."
        )
    table = check.coef_table(level)
    classes, index = getattr(model, "classes_", None), getattr(model, "positive_index_", None)
    if index is not None and table.index.nlevels == 1:
        table = oriented_coefficients(table, classes, index)
    table.attrs["method"] = check.method
    return sentence, table
