"""dask collections: recognising them, importing dask, and lazy block-wise prediction."""

import functools

import numpy as np

_DASK_EXTRA = 'pip install "skbayeslogit[dask]"'


def is_dask_collection(obj):
    """True for dask arrays, DataFrames and Series, without importing dask."""
    return hasattr(type(obj), "__dask_graph__")


def require_dask():
    """Import dask (array and dataframe), or say which extra to install."""
    try:
        import dask
        import dask.array as da
    except ImportError as exc:
        raise ImportError(
            "Fitting or predicting on dask collections needs dask, which is not installed: "
            f"{_DASK_EXTRA}"
        ) from exc
    return dask, da


def dask_aware(method):
    """Decorate a predict method: dask input gives lazy, block-wise dask output.

    Each chunk of rows is predicted by the method itself on numpy input
    (the fitted estimator travels with the task); the result's other
    dimensions are learnt from a one-row call. Methods that return a pair
    (``logit_moments``, ``predict_interval``) give a pair of dask arrays.
    """

    @functools.wraps(method)
    def wrapper(self, X, *args, **kwargs):
        if not is_dask_collection(X):
            return method(self, X, *args, **kwargs)
        return predict_dask(self, method, X, args, kwargs)

    return wrapper


def predict_dask(estimator, method, X, args, kwargs):
    """``method`` of a fitted ``estimator`` over the row chunks of dask ``X``, lazily."""
    _, da = require_dask()
    from sklearn.utils.validation import check_is_fitted

    check_is_fitted(estimator, "coef_")
    if not hasattr(X, "chunks"):
        if not hasattr(X, "to_dask_array"):
            raise TypeError(f"unsupported dask input for X: {type(X).__name__}.")
        names = getattr(estimator, "feature_names_in_", None)
        if names is not None and list(X.columns) != list(names):
            raise ValueError(
                "The feature names should match those that were passed during fit: "
                f"got {list(X.columns)}, expected {list(names)}."
            )
        X = X.to_dask_array(lengths=True)
    if X.ndim != 2 or X.shape[1] != estimator.n_features_in_:
        raise ValueError(
            f"X has shape {X.shape}, but {type(estimator).__name__} is expecting "
            f"{estimator.n_features_in_} features as input."
        )
    X = X.rechunk({1: -1})
    names = getattr(estimator, "feature_names_in_", None)

    def as_input(Xb):
        # Named columns for a model fitted with names: scikit-learn would
        # otherwise warn on every block.
        if names is None:
            return Xb
        import pandas as pd

        return pd.DataFrame(Xb, columns=names)

    probe = method(estimator, as_input(np.zeros((1, X.shape[1]))), *args, **kwargs)

    def one(out_index, sample):
        sample = np.asarray(sample)
        extra = sample.shape[1:]

        def block(Xb):
            res = method(estimator, as_input(Xb), *args, **kwargs)
            return res if out_index is None else res[out_index]

        chunks = (X.chunks[0], *((s,) for s in extra))
        drop = None if extra else 1
        new = list(range(2, 1 + len(extra))) if len(extra) > 1 else None
        return X.map_blocks(
            block,
            dtype=sample.dtype,
            chunks=chunks,
            drop_axis=drop,
            new_axis=new,
            meta=np.empty((0,) * sample.ndim, dtype=sample.dtype),
        )

    if isinstance(probe, tuple):
        return tuple(one(i, s) for i, s in enumerate(probe))
    return one(None, probe)
