"""Model files of ``skbayeslogit report --out``, saved so that loading runs no code.

A model file is a ``skops.io`` archive (a zip of JSON and numpy arrays): the
fitted estimator plus what ``score`` needs to use it (the feature list, the
target, the model's name and the version of skbayeslogit that wrote it).
Loading reads the archive's list of types first and refuses any type outside
:data:`TRUSTED_TYPES` before building anything, unlike a pickle, which runs
whatever the file says while it is read. Old pickle (joblib) model files are
loaded only when the caller passes ``trust_pickle=True``.
"""

import io
import numbers
from pathlib import Path

#: Suffix of the model files written by ``report --out``.
SUFFIX = ".skops"

#: The types of this package that a model file may hold beyond the numpy,
#: scipy and scikit-learn types skops trusts by default. A test saves every
#: model the registry knows and asserts that skops finds exactly these, so a
#: new type fails a test instead of being trusted silently.
TRUSTED_TYPES = (
    # Built by a SimpleImputer (missing="impute"): a dtype, which runs no code.
    "numpy.dtype",
    "skbayeslogit._fit.posterior.GaussianPosterior",
    "skbayeslogit._frame.levels.CategoricalEncoder",
    "skbayeslogit._frame.levels.LevelCodes",
    # The one-hot encoder's name function (a reference to our own function).
    "skbayeslogit._frame.levels._position_name",
    "skbayeslogit._frame.model.FrameModel",
    "skbayeslogit.labelflip.LabelFlipLogisticClassifier",
    "skbayeslogit.laplace.LaplaceLogisticClassifier",
    "skbayeslogit.probit.ProbitClassifier",
    "skbayeslogit.standardized.StandardizedClassifier",
    "skbayeslogit.tempered.TemperedLogisticClassifier",
)

#: What a model file must carry, with the words an error uses for each.
REQUIRED = {
    "model": "the fitted model",
    "features": "the feature list",
    "target": "the target name",
    "model_name": "the model name",
    "skbayeslogit_version": "the version of skbayeslogit that wrote it",
}

_ZIP_MAGIC = b"PK\x03\x04"
_PICKLE_MAGIC = b"\x80"


class ModelFileError(ValueError):
    """A model file that cannot be used; the message is one line."""


def save_model_file(path, model, *, model_name, target, features, classes):
    """Write ``model`` and what ``score`` needs into a skops archive at ``path``."""
    import skops.io as sio

    from .. import __version__

    sio.dump(
        {
            "model": model,
            "model_name": str(model_name),
            "target": str(target),
            "features": [str(f) for f in features],
            "classes": [str(c) for c in classes],
            "skbayeslogit_version": __version__,
        },
        Path(path),
    )


def load_model_file(path, *, trust_pickle=False):
    """Read a model file written by ``report --out``.

    Parameters
    ----------
    path : path-like
    trust_pickle : bool, default=False
        Also accept an old pickle/joblib model file. Loading a pickle runs
        any code the file contains: pass True only for a file from a source
        you trust.

    Returns
    -------
    dict
        ``model``, ``features``, ``target``, ``model_name``,
        ``skbayeslogit_version`` and (when saved) ``classes``.

    Raises
    ------
    ModelFileError
        With one line naming the problem (not a model file, a pickle without
        ``trust_pickle``, an untrusted type, something missing).
    """
    path = Path(path)
    if path.is_dir():
        raise ModelFileError(f"model file {path} is a folder; name a model_*{SUFFIX} file in it")
    if not path.is_file():
        raise ModelFileError(f"model file not found: {path}")
    data = path.read_bytes()
    if data.startswith(_ZIP_MAGIC):
        saved = _load_skops(path, data)
    elif trust_pickle:
        saved = _load_pickle(path, data)
    elif data.startswith(_PICKLE_MAGIC):
        raise ModelFileError(
            f"cannot load a model from {path}: it is a pickle (joblib) file, which can run "
            f"code when loaded; rerun 'report --out' to get a {SUFFIX} file, or pass "
            "--trust-pickle if you trust where the file came from"
        )
    else:
        raise ModelFileError(
            f"cannot load a model from {path}: not a skbayeslogit model file (a model_*{SUFFIX} "
            "written by 'report --out'); for an older pickle/joblib model file from a source "
            "you trust, pass --trust-pickle"
        )
    return _checked(path, saved)


def _load_skops(path, data):
    import skops.io as sio
    from skops.io.exceptions import UntrustedTypesFoundException

    try:
        return sio.loads(data, trusted=list(TRUSTED_TYPES))
    except UntrustedTypesFoundException as exc:
        found = sorted(set(sio.get_untrusted_types(data=data)) - set(TRUSTED_TYPES))
        raise ModelFileError(
            f"cannot load a model from {path}: it holds types skbayeslogit does not trust: "
            f"{', '.join(found) or exc}"
        ) from exc
    except Exception as exc:  # noqa: BLE001 - a damaged archive fails in many ways
        raise ModelFileError(
            f"cannot load a model from {path}: the archive is damaged or not a model file "
            f"({type(exc).__name__}: {_first_line(exc)})"
        ) from exc


def _load_pickle(path, data):
    import joblib

    try:
        return joblib.load(io.BytesIO(data))
    except Exception as exc:  # noqa: BLE001 - any unpickling failure is the same user error
        raise ModelFileError(
            f"cannot load a model from {path} as a pickle: {type(exc).__name__}: "
            f"{_first_line(exc)}"
        ) from exc


def _first_line(exc):
    text = str(exc).strip()
    return text.splitlines()[0] if text else "no detail"


def _checked(path, saved):
    """``saved`` when it carries everything ``score`` needs, else a one-line error."""
    if not isinstance(saved, dict):
        raise ModelFileError(
            f"cannot load a model from {path}: it holds a {type(saved).__name__}, not a "
            "model file written by 'skbayeslogit report --out'"
        )
    missing = [f"{key} ({what})" for key, what in REQUIRED.items() if key not in saved]
    if missing:
        raise ModelFileError(f"model file {path} lacks {', '.join(missing)}")
    model, features = saved["model"], saved["features"]
    if not hasattr(model, "predict_proba") or not hasattr(model, "classes_"):
        raise ModelFileError(
            f"model file {path}: 'model' is a {type(model).__name__}, not a fitted classifier"
        )
    if (
        not isinstance(features, list | tuple)
        or not features
        or not all(isinstance(f, str) for f in features)
    ):
        raise ModelFileError(
            f"model file {path}: the feature list must be a non-empty list of column names; "
            f"got {features!r:.80}"
        )
    n_in = getattr(model, "n_features_in_", None)
    if isinstance(n_in, numbers.Integral) and n_in != len(features):
        raise ModelFileError(
            f"model file {path}: its feature list names {len(features)} column(s) but its "
            f"model was fitted on {n_in}"
        )
    return {**saved, "features": list(features)}
