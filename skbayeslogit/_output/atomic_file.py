"""One output file written whole or not at all (a temporary file renamed into place)."""

import os
import tempfile
from pathlib import Path

from .run_folder import OutputError, default_mode, os_reason


def check_file_target(path, option="--out"):
    """Refuse, before any work, a target that cannot become a regular file.

    Returns
    -------
    pathlib.Path
        The target as an absolute path.
    """
    path = Path(path).absolute()
    parent = path.parent
    for above in reversed(path.parents):
        if above.exists() and not above.is_dir():
            raise OutputError(f"{option} {path}: {above} is a file, not a folder")
    if not parent.is_dir():
        raise OutputError(f"{option} {path}: the folder {parent} does not exist")
    if path.is_dir():
        raise OutputError(f"{option} {path} is a folder; name a file to write")
    if path.exists() and not path.is_file():
        raise OutputError(f"{option} {path} exists and is not a regular file")
    if not os.access(parent, os.W_OK | os.X_OK):
        raise OutputError(f"{option} {path}: the folder {parent} is read-only")
    return path


def write_atomically(path, write, option="--out"):
    """Call ``write(temporary_path)``, then rename the result to ``path``.

    On any failure (a full disk, an interruption) the temporary file is
    removed and ``path`` is left as it was.
    """
    path = check_file_target(path, option)
    try:
        fd, tmp = tempfile.mkstemp(prefix=f".{path.name}.partial-", dir=path.parent)
    except OSError as exc:
        raise OutputError(f"cannot write {option} {path}: {os_reason(exc)}") from exc
    os.close(fd)
    try:
        write(tmp)
        os.chmod(tmp, default_mode(0o666))
        os.replace(tmp, path)
    except OSError as exc:
        _unlink(tmp)
        raise OutputError(f"cannot write {option} {path}: {os_reason(exc)}") from exc
    except BaseException:
        _unlink(tmp)
        raise
    return path


def _unlink(tmp):
    try:
        os.unlink(tmp)
    except OSError:
        pass
