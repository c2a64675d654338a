"""Output folders that never mix: written whole or not at all, checked before any work.

Each check compares the folder on disk with what the run wrote (file names
and SHA-256 from hashlib) or with what was there before.
"""

import errno
import hashlib
import json
import os
import signal
import subprocess
import sys
import textwrap
import threading
import time

import pytest

from skbayeslogit._output.atomic_file import write_atomically
from skbayeslogit._output.run_folder import MANIFEST, OutputError, RunFolder
from skbayeslogit.cli import main


def _ours(path, files=("old.csv",)):
    path.mkdir(parents=True)
    for name in files:
        (path / name).write_text("old run\n")
    (path / MANIFEST).write_text(json.dumps({"tool": "skbayeslogit", "kind": "report"}))


def _read_only(monkeypatch):
    real = os.access
    monkeypatch.setattr(os, "access", lambda p, mode: False if mode & os.W_OK else real(p, mode))


def _no_temp_dirs(monkeypatch):
    def refuse(*args, **kwargs):
        raise PermissionError(errno.EACCES, "Permission denied")

    monkeypatch.setattr("tempfile.mkdtemp", refuse)


# (case, how to prepare tmp_path / "out", None when accepted or the refusal's pattern)
TARGETS = [
    ("new folder", lambda t, m: None, None),
    ("new nested folders", lambda t, m: "a/b/out", None),
    ("empty folder", lambda t, m: (t / "out").mkdir(), None),
    ("earlier run of ours", lambda t, m: _ours(t / "out"), None),
    ("folder not ours", lambda t, m: ((t / "out").mkdir(), (t / "out" / "x.txt").write_text("x")),
     "did not write"),
    ("manifest of another tool", lambda t, m: (
        (t / "out").mkdir(), (t / "out" / MANIFEST).write_text('{"tool": "other"}')),
     "did not write"),
    ("broken manifest", lambda t, m: (
        (t / "out").mkdir(), (t / "out" / MANIFEST).write_text("{not json")), "did not write"),
    ("a file", lambda t, m: (t / "out").write_text("data"), "exists and is not a folder"),
    ("under a file", lambda t, m: ((t / "f").write_text("x"), "f/out")[1],
     "f is a file, not a folder"),
    ("symlink to a folder",
     lambda t, m: ((t / "real").mkdir(), (t / "out").symlink_to(t / "real")),
     "exists and is not a folder"),
    ("read-only folder of ours", lambda t, m: (_ours(t / "out"), _read_only(m)), "read-only"),
    ("cannot write beside it", lambda t, m: _no_temp_dirs(m), "cannot write beside.*denied"),
]  # fmt: skip


@pytest.mark.parametrize(("case", "prepare", "refusal"), TARGETS, ids=[c[0] for c in TARGETS])
def test_targets_are_checked_before_any_work(tmp_path, monkeypatch, case, prepare, refusal):
    rel = prepare(tmp_path, monkeypatch)
    target = tmp_path / (rel if isinstance(rel, str) else "out")
    before = sorted(p.name for p in tmp_path.rglob("*"))
    if refusal is not None:
        with pytest.raises(OutputError, match=refusal) as info:
            RunFolder(target)
        assert "\n" not in str(info.value)
        assert sorted(p.name for p in tmp_path.rglob("*")) == before  # nothing made, nothing lost
        return
    with RunFolder(target) as folder:
        (folder.path / "new.csv").write_text("new run\n")
        manifest = folder.write_manifest(options={"k": 1}, input_info={}, version="t")
        folder.commit()
    # Exactly the new run's files: an earlier run's are gone, never merged.
    assert sorted(p.name for p in target.iterdir()) == ["manifest.json", "new.csv"]
    digest = hashlib.sha256(b"new run\n").hexdigest()
    assert manifest["files"] == [{"name": "new.csv", "bytes": 8, "sha256": digest}]
    assert [p.name for p in target.parent.iterdir() if p.name.startswith(".")] == []


@pytest.mark.parametrize("earlier", [False, True])
@pytest.mark.parametrize("nested", [False, True])
def test_a_failed_run_leaves_the_target_as_it_was(tmp_path, earlier, nested):
    target = tmp_path / ("a/b/out" if nested else "out")
    if earlier:
        _ours(target)
    before = {p: p.read_bytes() for p in tmp_path.rglob("*") if p.is_file()}
    with pytest.raises(KeyboardInterrupt):
        with RunFolder(target) as folder:
            (folder.path / "model_laplace.skops").write_text("half")
            raise KeyboardInterrupt
    after = {p: p.read_bytes() for p in tmp_path.rglob("*") if p.is_file()}
    assert after == before
    # Parents made for the run are removed with it.
    assert sorted(p.name for p in tmp_path.iterdir()) == (["a"] if earlier and nested else
                                                          ["out"] if earlier else [])  # fmt: skip


def test_runs_committing_at_once_leave_one_whole_folder(tmp_path):
    """Eight runs race to replace one folder; the survivor holds one run's files only."""
    target = tmp_path / "out"
    start = threading.Barrier(8)
    errors = []

    def one_run(k):
        try:
            with RunFolder(target) as folder:
                for name in ("a.csv", "b.csv", f"only_{k}.csv"):
                    (folder.path / name).write_text(f"run {k}\n")
                folder.write_manifest(options={"run": k}, input_info={}, version="t")
                start.wait()
                folder.commit()
        except Exception as exc:  # noqa: BLE001 - collected and asserted below
            errors.append(exc)

    threads = [threading.Thread(target=one_run, args=(k,)) for k in range(8)]
    for t in threads:
        t.start()
    for t in threads:
        t.join()
    assert errors == []
    manifest = json.loads((target / MANIFEST).read_text())
    k = manifest["options"]["run"]
    assert sorted(p.name for p in target.iterdir()) == [
        "a.csv",
        "b.csv",
        MANIFEST,
        f"only_{k}.csv",
    ]
    assert {(target / n).read_text() for n in ("a.csv", "b.csv", f"only_{k}.csv")} == {
        f"run {k}\n"
    }
    assert sorted(p.name for p in tmp_path.iterdir()) == ["out"]


def _fifo(path):
    os.mkfifo(path)


def _full_disk(tmp):
    raise OSError(errno.ENOSPC, "No space left on device")


# (case, prepare(tmp_path, monkeypatch) -> target, write function or None, refusal or None)
FILE_TARGETS = [
    ("new file", lambda t, m: t / "p.csv", None, None),
    ("replaces a file", lambda t, m: ((t / "p.csv").write_text("old"), t / "p.csv")[1], None,
     None),
    ("a folder", lambda t, m: ((t / "d").mkdir(), t / "d")[1], None, "is a folder"),
    ("missing folder", lambda t, m: t / "nope" / "p.csv", None, "nope does not exist"),
    ("under a file", lambda t, m: ((t / "f").write_text("x"), t / "f" / "p.csv")[1], None,
     "f is a file, not a folder"),
    ("a pipe", lambda t, m: (_fifo(t / "p.csv"), t / "p.csv")[1], None, "not a regular file"),
    ("read-only folder", lambda t, m: (_read_only(m), t / "p.csv")[1], None, "read-only"),
    ("full disk", lambda t, m: ((t / "p.csv").write_text("old"), t / "p.csv")[1], _full_disk,
     "No space left on device"),
]  # fmt: skip


@pytest.mark.parametrize(
    ("case", "prepare", "write", "refusal"), FILE_TARGETS, ids=[c[0] for c in FILE_TARGETS]
)
def test_score_out_file_is_written_whole_or_not_at_all(tmp_path, monkeypatch, case, prepare,
                                                       write, refusal):  # fmt: skip
    target = prepare(tmp_path, monkeypatch)
    before = {p.name: p.read_bytes() for p in tmp_path.iterdir() if p.is_file()}
    if refusal is not None:
        with pytest.raises(OutputError, match=refusal) as info:
            write_atomically(target, write or (lambda tmp: open(tmp, "w").write("new")))
        assert "\n" not in str(info.value)
        after = {p.name: p.read_bytes() for p in tmp_path.iterdir() if p.is_file()}
        assert after == before  # the old file kept, no temporary file left
        return
    write_atomically(target, lambda tmp: open(tmp, "w").write("new"))
    assert target.read_text() == "new"
    assert sorted(p.name for p in tmp_path.iterdir()) == ["p.csv"]


# -- the command line ----------------------------------------------------------------


def _refuse_to_compute(*args, **kwargs):
    raise AssertionError("the report was computed before the output was checked")


@pytest.mark.parametrize(
    ("case", "out", "match"),
    [
        ("a file", "data.csv", "exists and is not a folder"),
        ("under a file", "data.csv/out", "data.csv is a file, not a folder"),
        ("a folder not ours", ".", "did not write"),
    ],
)
def test_report_checks_out_before_computing(tmp_path, capsys, monkeypatch, case, out, match):
    import skbayeslogit.report

    monkeypatch.setattr(skbayeslogit.report, "build_report", _refuse_to_compute)
    (tmp_path / "data.csv").write_text("x,y\n1,a\n2,b\n")
    code = main(["report", str(tmp_path / "data.csv"), "--target", "y", "--quiet",
                 "--out", str(tmp_path / out)])  # fmt: skip
    err = capsys.readouterr().err.strip().splitlines()
    assert code == 2 and len(err) == 1 and err[0].startswith("skbayeslogit: error: --out")
    assert match in err[0]


@pytest.mark.parametrize(
    ("case", "out", "match"),
    [
        ("a folder", ".", "is a folder"),
        ("missing folder", "nope/p.csv", "does not exist"),
        ("under a file", "new.csv/p.csv", "is a file, not a folder"),
    ],
)
def test_score_checks_out_before_loading(tmp_path, capsys, case, out, match):
    (tmp_path / "new.csv").write_text("x\n1\n")
    # The model file does not exist either: the --out error must come first.
    code = main(["score", str(tmp_path / "missing.skops"), str(tmp_path / "new.csv"),
                 "--out", str(tmp_path / out)])  # fmt: skip
    err = capsys.readouterr().err.strip().splitlines()
    assert code == 2 and len(err) == 1 and match in err[0] and "--out" in err[0]


def test_a_full_disk_while_writing_is_one_line_and_leaves_nothing(tmp_path, capsys, monkeypatch):
    import skbayeslogit.report

    def full(report, df, out_dir, caution):
        (out_dir / "model_laplace.skops").write_text("half")
        raise OSError(errno.ENOSPC, "No space left on device", str(out_dir / "report.html"))

    monkeypatch.setattr(skbayeslogit.report, "write_files", full)
    out = tmp_path / "out"
    code = main(["report", "--models", "laplace", "--cv", "2", "--quiet", "--out", str(out)])
    err = capsys.readouterr().err.strip().splitlines()
    assert code == 2 and len(err) == 1 and "No space left on device" in err[0]
    assert list(tmp_path.iterdir()) == []


def test_a_second_report_replaces_the_first_whole(tmp_path, capsys):
    out = tmp_path / "out"
    base = ["report", "--cv", "2", "--quiet", "--out", str(out)]
    assert main([*base, "--models", "laplace,probit"]) == 0
    assert (out / "model_probit.skops").is_file()
    assert main([*base, "--models", "laplace"]) == 0
    manifest = json.loads((out / MANIFEST).read_text())
    listed = sorted(f["name"] for f in manifest["files"])
    assert sorted(p.name for p in out.iterdir()) == sorted([*listed, MANIFEST])
    assert not (out / "model_probit.skops").exists()
    for f in manifest["files"]:
        assert hashlib.sha256((out / f["name"]).read_bytes()).hexdigest() == f["sha256"]
    assert manifest["options"]["models"] == ["laplace"] and manifest["input"]["source"] == "demo"
    assert sorted(p.name for p in tmp_path.iterdir()) == ["out"]


_SLOW_RUN = textwrap.dedent(
    """
    import pathlib, sys, time
    import skbayeslogit.report as report
    from skbayeslogit.cli import run

    started = pathlib.Path(sys.argv[1])
    def wait(*args, **kwargs):
        started.write_text("started")
        time.sleep(120)
    class Done:
        pass
    if sys.argv[2] == "computing":
        report.build_report = wait
    else:
        report.build_report = lambda *a, **k: Done()
        report.render_text = lambda r: ""
        def write_half(rep, df, out_dir, caution):
            (out_dir / "model_laplace.skops").write_text("complete-looking")
            wait()
        report.write_files = write_half
    sys.argv = ["skbayeslogit", "report", "--models", "laplace", "--quiet", "--out", sys.argv[3]]
    run()
    """
)


@pytest.mark.parametrize("earlier", [False, True], ids=["no earlier run", "earlier run"])
@pytest.mark.parametrize("phase", ["computing", "writing"])
@pytest.mark.parametrize(("signum", "code"), [(signal.SIGINT, 130), (signal.SIGTERM, 143)])
def test_interrupted_runs_exit_in_one_line_and_leave_nothing(tmp_path, signum, code, phase,
                                                             earlier):  # fmt: skip
    out = tmp_path / "work" / "out"
    (tmp_path / "work").mkdir()
    if earlier:
        _ours(out)
    before = {p: p.read_bytes() for p in tmp_path.rglob("*") if p.is_file()}
    started = tmp_path / "started"
    proc = subprocess.Popen(
        [sys.executable, "-c", _SLOW_RUN, str(started), phase, str(out)],
        stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True,
    )  # fmt: skip
    deadline = time.monotonic() + 120
    while not started.exists() and proc.poll() is None and time.monotonic() < deadline:
        time.sleep(0.05)
    proc.send_signal(signum)
    _, err = proc.communicate(timeout=60)
    assert proc.returncode == code, err
    lines = err.strip().splitlines()
    assert len(lines) == 1 and lines[0].startswith("skbayeslogit: stopped by"), err
    started.unlink()
    after = {p: p.read_bytes() for p in tmp_path.rglob("*") if p.is_file()}
    assert after == before
    assert sorted(p.name for p in (tmp_path / "work").iterdir()) == (["out"] if earlier else [])
