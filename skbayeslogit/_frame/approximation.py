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
    checked, X = laplace_estimator(model, X)
    return checked.check_approximation(X, y, **values)


def laplace_estimator(model, X):
    """The estimator with the Laplace posterior and the features it was fitted on."""
    if hasattr(model, "pipeline_"):
        # A FrameModel: its final estimator saw the encoded columns.
        model, X = model.pipeline_[-1], model.transform(X)
    if hasattr(model, "check_approximation"):
        return model, X
    inner = getattr(model, "estimator_", None)
    if hasattr(inner, "check_approximation") and hasattr(model, "center_"):
        return inner, (X - model.center_) / model.scale_
    name = type(getattr(model, "estimator_", model)).__name__
    raise TypeError(
        "check_approximation needs a model with a Laplace posterior ('laplace' or "
        f"'probit'); got {name}."
    )
