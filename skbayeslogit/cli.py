"""Command line: ``skbayeslogit report`` and ``skbayeslogit score``.

Errors are one line on stderr and exit code 2 (``--debug`` shows the
traceback); progress goes to stderr unless ``--quiet``. Ctrl-C exits with
130 and SIGTERM with 143, one line and no traceback, and leave no
half-written output: ``report --out`` writes a whole folder or none, and
``score --out`` a whole file or none.
"""

import argparse
import os
import sys
import traceback
from contextlib import nullcontext

from ._frame.command_inputs import (
    CommandError,
    check_columns,
    check_costs,
    check_folds,
    check_level,
    check_models,
    check_seed,
    column_names,
    read_input,
    split_names,
)
from ._output.interrupts import (
    EXIT_INTERRUPTED,
    EXIT_TERMINATED,
    Terminated,
    exit_quietly_on_signals,
    terminate_as_exception,
)
from ._output.run_folder import OutputError

EXIT_USAGE = 2

MODEL_FILES = (
    "A model file (model_<name>.skops, written by 'report --out') holds a fitted model "
    "with its feature list, target name, model name and the skbayeslogit version that "
    "wrote it. It is read without running code from the file: only the types of this "
    "package, numpy, scipy and scikit-learn are accepted. Still, load only model files "
    "from sources you trust. Older pickle/joblib model files can run code when loaded and "
    "are refused unless --trust-pickle is given."
)


def _parser():
    parser = argparse.ArgumentParser(
        prog="skbayeslogit",
        description="Honest probabilities, coefficient intervals and doubtful labels "
        "for a classification table.",
    )
    sub = parser.add_subparsers(dest="command", required=True)
    _report_parser(sub)
    sco = sub.add_parser(
        "score",
        help="probabilities, credible bounds and labels for new rows from a saved model",
        description="Score new rows with a model saved by 'report --out'. " + MODEL_FILES,
    )
    sco.add_argument("model_file", help="a model_<name>.skops file written by 'report --out'")
    sco.add_argument("file", help="CSV file of new rows with the model's feature columns")
    sco.add_argument("--level", type=float, default=0.9, help="credible level (default 0.9)")
    _reading(sco)
    sco.add_argument(
        "--out", help="write the predictions to this CSV file, whole or not at all "
        "(default: print them)"
    )  # fmt: skip
    sco.add_argument(
        "--trust-pickle",
        action="store_true",
        help="also load an old pickle/joblib model file; loading a pickle runs any code it "
        "holds, so use this only for a file from a source you trust",
    )
    _common(sco)
    return parser


def _report_parser(sub):
    rep = sub.add_parser(
        "report",
        help="fit, compare and summarise the models on a CSV file (no file: the demo)",
        description="Run the whole job on a CSV file: cross-validated comparison, "
        "coefficient intervals, prior scale by evidence, doubtful labels, calibration, "
        "cost threshold and predictions. Without a file, the built-in demo (an invented "
        "orchard intake log) is used.",
    )
    rep.add_argument("file", nargs="?", help="CSV file, one row per case")
    rep.add_argument("--target", help="label column (default for the demo: storage_grade)")
    _reading(rep)
    _roles(rep)
    rep.add_argument(
        "--models",
        default="laplace,probit,tempered",
        help="comma-separated: laplace,probit,tempered (probit: two classes only)",
    )
    rep.add_argument("--level", type=float, default=0.9, help="credible level (default 0.9)")
    rep.add_argument("--cost-fp", type=float, help="cost of a false positive")
    rep.add_argument("--cost-fn", type=float, help="cost of a false negative")
    rep.add_argument("--cv", type=int, default=5, help="cross-validation folds (default 5)")
    rep.add_argument(
        "--top", type=int, default=20,
        help="how many doubtful labels the text and the page show (default 20; the "
        "doubtful table in --out holds them all)",
    )  # fmt: skip
    rep.add_argument(
        "--seed", type=int, default=0,
        help="seed of every random draw: the folds, the posterior draws and the demo",
    )  # fmt: skip
    rep.add_argument(
        "--out",
        help="folder for CSV tables, figures, model files, report.html and manifest.json; "
        "written whole at the end. A folder an earlier report wrote is replaced whole; any "
        "other non-empty folder is refused. " + MODEL_FILES,
    )
    rep.add_argument(
        "--missing",
        choices=("error", "drop", "impute"),
        help="missing cells in the target or a feature: stop with an error naming the "
        "columns (default), leave those rows out (say how many), or impute the features "
        "(median, most frequent level)",
    )
    rep.add_argument("--dropna", action="store_true", help="the same as --missing drop")
    _common(rep)


def _reading(p):
    p.add_argument("--sep", help="the file's delimiter (default: sniffed among , ; tab |)")
    p.add_argument(
        "--decimal", choices=(".", ","),
        help="the decimal mark (default: a comma only in a semicolon file whose numbers "
        "are written with one)",
    )  # fmt: skip


def _roles(rep):
    many = "; repeat the option for a name holding a comma"
    rep.add_argument(
        "--features", action="append",
        help="feature columns, comma-separated (default: every column the role rules make "
        "a feature: numeric and categorical, not IDs, constants or free text)" + many,
    )  # fmt: skip
    rep.add_argument(
        "--id", action="append",
        help="ID column(s): never features, kept in row-level outputs" + many,
    )  # fmt: skip
    rep.add_argument("--exclude", action="append", help="columns to leave out" + many)
    rep.add_argument("--weight", help="column of frequency weights (3 counts as three rows)")
    rep.add_argument(
        "--positive",
        help="positive class of a binary target (probabilities, intervals, confusion and "
        "costs are about it; default: the second class in sorted order)",
    )
    rep.add_argument(
        "--max-levels", type=int, default=20,
        help="text columns with more distinct values are left out (default 20)",
    )  # fmt: skip


def _common(p):
    p.add_argument("--quiet", action="store_true", help="no progress messages")
    p.add_argument("--debug", action="store_true", help="show tracebacks on errors")


def _report_input(args, say):
    """The data, target, a description, the manifest's record of the input, the reading."""
    from .datasets import make_orchard_lots
    from .report import frame_digest

    if args.file is None:
        df = make_orchard_lots(400, random_state=args.seed)
        say("no file given: running on the built-in demo data (invented orchard intake log)")
        source = (
            "DEMO DATA: an invented orchard intake log of 400 apple lots "
            f"(skbayeslogit.datasets, seed {args.seed}); no file given"
        )
        info = {"source": "demo", "rows": len(df), "sha256_of_csv": frame_digest(df)}
        return df, args.target or "storage_grade", source, info, None
    if not args.target:
        raise CommandError("--target is required with a file: name the label column.")
    read, digest = read_input(args.file, args.sep, args.decimal)
    for line in read.summary_lines():
        say(f"read: {line}")
    df = read.frame
    info = {"source": os.path.abspath(args.file), "rows": len(df), "sha256": digest}
    return df, args.target, f"file {args.file} ({len(df)} rows)", info, read


def _report_options(args):
    """The report's options, checked before any work; what the manifest records."""
    check_level(args.level)
    check_costs(args.cost_fp, args.cost_fn)
    check_folds(args.cv)
    check_seed(args.seed)
    if args.top < 1:
        raise CommandError(f"--top must be an integer >= 1; got {args.top}")
    if args.max_levels < 2:
        raise CommandError(f"--max-levels must be an integer >= 2; got {args.max_levels}")
    if args.dropna and args.missing not in (None, "drop"):
        raise CommandError(
            f"--dropna means --missing drop; it contradicts --missing {args.missing}"
        )
    return {
        "file": args.file,
        "target": args.target,
        "models": check_models(split_names(args.models, "--models")),
        "level": args.level,
        "cost_fp": args.cost_fp,
        "cost_fn": args.cost_fn,
        "cv": args.cv,
        "top": args.top,
        "seed": args.seed,
        "missing": "drop" if args.dropna else (args.missing or "error"),
        "max_levels": args.max_levels,
        "positive": args.positive,
        "weight": args.weight,
        "out": args.out,
    }


def _column_options(args, df):
    """``--features``, ``--id``, ``--exclude`` and ``--weight`` checked against the columns."""
    columns = [str(c) for c in df.columns]
    named = {
        "features": column_names(args.features, "--features", columns),
        "id": column_names(args.id, "--id", columns),
        "exclude": column_names(args.exclude, "--exclude", columns),
    }
    if args.weight is not None:
        check_columns(df, [args.weight], "weight")
    return named


def _cmd_report(args, say):
    from .report import build_report, render_text, write_outputs

    options = _report_options(args)
    df, target, source, input_info, read = _report_input(args, say)
    check_columns(df, [target], "target")
    options.update(_column_options(args, df))
    # The output folder is checked, and its staging folder made, before the work.
    with _run_folder(args.out) or nullcontext() as folder:
        report = build_report(
            df,
            target,
            features=options["features"],
            models=options["models"],
            level=args.level,
            cost_fp=args.cost_fp,
            cost_fn=args.cost_fn,
            cv=args.cv,
            top=args.top,
            random_state=args.seed,
            source=source,
            progress=say,
            reading=read,
            **{k: options[k] for k in ("id", "exclude", "weight", "positive", "missing")},
            max_levels=args.max_levels,
        )
        sys.stdout.write(render_text(report))
        if args.out:
            say(f"writing tables, figures, models and report.html to {args.out}")
            written = write_outputs(report, df, folder, options=options, input_info=input_info)
            sys.stdout.write(
                f"\nwrote {len(written['csv'])} tables, {len(written['png'])} figures, "
                f"{len(written['model'])} models and {written['html'][0]}\n"
            )
    return 0


def _run_folder(out):
    if out is None:
        return None
    from ._output.run_folder import RunFolder

    return RunFolder(out, option="--out")


def _cmd_score(args, say):
    from ._output.atomic_file import check_file_target, write_atomically
    from ._output.model_file import load_model_file

    check_level(args.level)
    if args.out:
        check_file_target(args.out)
    read, _ = read_input(args.file, args.sep, args.decimal)
    df = read.frame
    saved = load_model_file(args.model_file, trust_pickle=args.trust_pickle)
    model, features = saved["model"], saved["features"]
    missing = [c for c in features if c not in df.columns]
    if missing:
        raise CommandError(
            f"the new rows lack the model's feature column(s): {', '.join(missing)} "
            f"(the model uses {', '.join(features)})"
        )
    from . import __version__, accessor  # noqa: F401  (registers df.bayeslogit)
    from ._frame.scoring import score_rows

    if saved["skbayeslogit_version"] != __version__:
        say(f"the model file was written by skbayeslogit {saved['skbayeslogit_version']}")
    say(f"scoring {len(df)} rows with the {saved['model_name']} model")
    out, messages = score_rows(df, model, args.level)
    for message in messages:
        say(message)
    if args.out:
        write_atomically(args.out, lambda tmp: out.to_csv(tmp, index=False))
        say(f"wrote {len(out)} predictions to {args.out}")
    else:
        text = out.to_string(index=False, float_format=lambda v: f"{v:.4f}", na_rep="")
        sys.stdout.write(text + "\n")
    return 0


def _error(args, exc):
    if args.debug:
        traceback.print_exc()
    if isinstance(exc, KeyError) and exc.args:
        message = exc.args[0]
    elif isinstance(exc, OSError) and exc.strerror:
        where = f": {exc.filename}" if exc.filename else ""
        message = f"{exc.strerror}{where}"
    else:
        message = str(exc).strip().splitlines()[0] if str(exc).strip() else type(exc).__name__
    print(f"skbayeslogit: error: {message}", file=sys.stderr)
    return EXIT_USAGE


def _stopped(args, what, code):
    if args.debug:
        traceback.print_exc()
    left = "; nothing was left half-written" if getattr(args, "out", None) else ""
    print(f"skbayeslogit: stopped by {what}{left}", file=sys.stderr, flush=True)
    return code


def main(argv=None):
    """Entry point of the ``skbayeslogit`` command; returns the exit code."""
    args = _parser().parse_args(argv)

    def say(message):
        if not args.quiet:
            print(f"[skbayeslogit] {message}", file=sys.stderr, flush=True)

    command = _cmd_report if args.command == "report" else _cmd_score
    try:
        with terminate_as_exception():
            return command(args, say)
    except KeyboardInterrupt:
        return _stopped(args, "Ctrl-C", EXIT_INTERRUPTED)
    except Terminated:
        return _stopped(args, "SIGTERM", EXIT_TERMINATED)
    except (CommandError, OutputError, ValueError, KeyError, TypeError, ImportError,
            OSError) as exc:  # fmt: skip
        return _error(args, exc)


def run():
    """The console script: :func:`main`, then exit.

    After an interruption the process ends at once: worker threads may still
    be finishing a block of rows, and a second signal while the interpreter
    waited for them would print a traceback. A signal during the shutdown
    after a finished command ends the process quietly too.
    """
    code = main()
    exit_quietly_on_signals()
    if code in (EXIT_INTERRUPTED, EXIT_TERMINATED):
        sys.stdout.flush()
        sys.stderr.flush()
        os._exit(code)
    sys.exit(code)


if __name__ == "__main__":  # pragma: no cover
    run()
