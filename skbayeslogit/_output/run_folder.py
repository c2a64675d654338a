"""An output folder that appears whole or not at all, with a manifest.

A run writes every file into a hidden staging folder beside the target and,
at the end, moves it into place with ``rename`` (atomic within one file
system). A folder that an earlier run of this tool wrote (it holds our
``manifest.json``) is replaced whole, never merged into; any other non-empty
folder is refused. The target is checked, and the staging folder made,
before any computation, so an unwritable ``--out`` fails at once.
"""

import hashlib
import json
import os
import shutil
import tempfile
import time
from pathlib import Path

from .interrupts import signals_held

MANIFEST = "manifest.json"
TOOL = "skbayeslogit"
KIND = "report"


class OutputError(Exception):
    """An output location that cannot be used; the message is one line."""


def sha256_bytes(data):
    """Hex SHA-256 of ``data``."""
    return hashlib.sha256(data).hexdigest()


def is_our_folder(path):
    """Whether ``path`` holds a manifest written by ``skbayeslogit report``."""
    try:
        manifest = json.loads((Path(path) / MANIFEST).read_text(encoding="utf-8"))
    except (OSError, ValueError):
        return False
    return isinstance(manifest, dict) and (manifest.get("tool"), manifest.get("kind")) == (
        TOOL,
        KIND,
    )


def os_reason(exc):
    """The operating system's words for an OSError (``No space left on device``)."""
    return exc.strerror or type(exc).__name__


def _check_target(target, option):
    """Refuse, before any work, a target that is a file or a folder not ours."""
    for parent in reversed(target.parents):
        if parent.exists() and not parent.is_dir():
            raise OutputError(f"{option} {target}: {parent} is a file, not a folder")
    if target.is_symlink() or (target.exists() and not target.is_dir()):
        raise OutputError(f"{option} {target} exists and is not a folder; name a folder")
    if target.is_dir():
        try:
            empty = not any(target.iterdir())
        except OSError as exc:
            raise OutputError(f"{option} {target}: cannot list it ({os_reason(exc)})") from exc
        if not empty and not is_our_folder(target):
            raise OutputError(
                f"{option} {target} is a folder that skbayeslogit did not write (no "
                f"{MANIFEST} of ours); refusing to replace it: name a new or empty folder"
            )
        if not os.access(target, os.W_OK | os.X_OK):
            raise OutputError(f"{option} {target} is read-only; cannot replace it")


class RunFolder:
    """A staging folder beside ``target``, moved into place by :meth:`commit`.

    Use as a context manager: leaving the block by an exception (including
    an interruption) removes the staging folder and any parent folders it
    created, and leaves the target as it was.

    Parameters
    ----------
    target : path-like
        The folder the run's files end up in.
    option : str
        How error messages name the target (the command-line option).
    """

    def __init__(self, target, option="--out"):
        self.target = Path(target).absolute()
        self.option = option
        _check_target(self.target, option)
        self._made_parents = self._make_parents()
        try:
            self.path = Path(
                tempfile.mkdtemp(prefix=f".{self.target.name}.partial-", dir=self.target.parent)
            )
        except OSError as exc:
            self._remove_parents()
            raise OutputError(
                f"cannot write beside {option} {self.target}: {os_reason(exc)}"
            ) from exc
        self.committed = False

    def _make_parents(self):
        made = []
        for parent in reversed(self.target.parents):
            if not parent.exists():
                try:
                    parent.mkdir()
                except OSError as exc:
                    self._made_parents = made
                    self._remove_parents()
                    raise OutputError(
                        f"cannot create {parent} for {self.option} {self.target}: {os_reason(exc)}"
                    ) from exc
                made.append(parent)
        return made

    def _remove_parents(self):
        for parent in reversed(self._made_parents):
            try:
                parent.rmdir()
            except OSError:
                break

    def __enter__(self):
        return self

    def __exit__(self, exc_type, exc, tb):
        if not self.committed:
            self.discard()
        return False

    def discard(self):
        """Remove the staging folder (and parents made for it); the target is untouched."""
        with signals_held():
            shutil.rmtree(self.path, ignore_errors=True)
            self._remove_parents()

    def write_manifest(self, *, options, input_info, version):
        """Write ``manifest.json``: every staged file with its size and hash, and the run."""
        files = []
        for path in sorted(self.path.rglob("*")):
            if path.is_file() and path.name != MANIFEST:
                data = path.read_bytes()
                rel = path.relative_to(self.path).as_posix()
                files.append({"name": rel, "bytes": len(data), "sha256": sha256_bytes(data)})
        manifest = {
            "tool": TOOL,
            "kind": KIND,
            "skbayeslogit_version": version,
            "created_utc": time.strftime("%Y-%m-%dT%H:%M:%SZ", time.gmtime()),
            "options": options,
            "input": input_info,
            "files": files,
        }
        text = json.dumps(manifest, indent=2, sort_keys=True, default=str)
        (self.path / MANIFEST).write_text(text + "\n", encoding="utf-8")
        return manifest

    def commit(self):
        """Move the staging folder into place, replacing an earlier run's folder whole."""
        os.chmod(self.path, default_mode(0o777))
        with signals_held():
            for _ in range(20):
                old = self._move_aside()
                try:
                    os.rename(self.path, self.target)
                except OSError:
                    # Another run moved its folder in between: set that one aside too.
                    if old is not None:
                        shutil.rmtree(old, ignore_errors=True)
                    continue
                self.committed = True
                if old is not None:
                    shutil.rmtree(old, ignore_errors=True)
                return self.target
        raise OutputError(f"{self.option} {self.target}: other runs kept replacing it; try again")

    def _move_aside(self):
        """Rename the existing target out of the way; its new path, or None when there is none.

        The target is renamed first and checked where no other run can reach
        it: checking it in place raced with runs that replaced it meanwhile.
        A folder that turns out not to be ours goes back where it was.
        """
        if self.target.is_symlink() or (self.target.exists() and not self.target.is_dir()):
            _check_target(self.target, self.option)  # raises, naming the problem
        old = Path(tempfile.mkdtemp(prefix=f".{self.target.name}.old-", dir=self.target.parent))
        try:
            os.rename(self.target, old)
        except FileNotFoundError:
            old.rmdir()
            return None
        except OSError as exc:
            old.rmdir()
            raise OutputError(
                f"cannot replace {self.option} {self.target}: {os_reason(exc)}"
            ) from exc
        if any(old.iterdir()) and not is_our_folder(old):
            try:
                os.rename(old, self.target)
                where = self.target
            except OSError:
                where = old
            raise OutputError(
                f"{self.option} {self.target} became a folder that skbayeslogit did not write; "
                f"refusing to replace it (it is at {where})"
            )
        return old


def default_mode(mode):
    """``mode`` less the process's umask: what a plain create would have given."""
    mask = os.umask(0)
    os.umask(mask)
    return mode & ~mask
