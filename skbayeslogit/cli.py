"""Command line: ``skbayeslogit report`` and ``skbayeslogit score``.

Errors are one line on stderr and exit code 2 (``--debug`` shows the
traceback); progress goes to stderr unless ``--quiet``.
"""

import argparse
import sys
import traceback
from pathlib import Path

EXIT_USAGE = 2


class CommandError(Exception):
    """A problem with the user's input, reported as one line."""


def _parser():
    parser = argparse.ArgumentParser(
        prog="skbayeslogit",
        description="Honest probabilities, coefficient intervals and doubtful labels "
        "for a classification table.",
    )
    sub = parser.add_subparsers(dest="command", required=True)

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
    rep.add_argument("--features", help="comma-separated feature columns (default: all numeric)")
    rep.add_argument(
        "--models",
        default="laplace,probit,tempered",
        help="comma-separated: laplace,probit,tempered",
    )
    rep.add_argument("--level", type=float, default=0.9, help="credible level (default 0.9)")
    rep.add_argument("--cost-fp", type=float, help="cost of a false positive")
    rep.add_argument("--cost-fn", type=float, help="cost of a false negative")
    rep.add_argument("--cv", type=int, default=5, help="cross-validation folds (default 5)")
    rep.add_argument("--seed", type=int, default=0, help="seed for the folds and the demo")
    rep.add_argument("--out", help="directory for CSV tables, figures, models and report.html")
    rep.add_argument(
        "--dropna", action="store_true", help="leave out rows with missing values (say how many)"
    )
    _common(rep)

    sco = sub.add_parser(
        "score",
        help="probabilities, credible bounds and labels for new rows from a saved model",
    )
    sco.add_argument("model_file", help="a model_*.joblib written by 'report --out'")
    sco.add_argument("file", help="CSV file of new rows with the model's feature columns")
    sco.add_argument("--level", type=float, default=0.9, help="credible level (default 0.9)")
    sco.add_argument("--out", help="write the predictions to this CSV (default: print them)")
    _common(sco)
    return parser


def _common(p):
    p.add_argument("--quiet", action="store_true", help="no progress messages")
    p.add_argument("--debug", action="store_true", help="show tracebacks on errors")


def _read_csv(path):
    import pandas as pd

    path = Path(path)
    if not path.is_file():
        raise CommandError(f"file not found: {path}")
    try:
        df = pd.read_csv(path)
    except (pd.errors.ParserError, UnicodeDecodeError, pd.errors.EmptyDataError) as exc:
        raise CommandError(f"cannot read {path} as CSV: {exc}") from exc
    if len(df) == 0:
        # Otherwise every column reads as text and the error blames the dtypes.
        raise CommandError(f"{path} has a header but no data rows")
    return df


def _split(text):
    return [t.strip() for t in text.split(",") if t.strip()] if text else None


def _check_columns(df, names, what):
    missing = [c for c in names if c not in df.columns]
    if missing:
        raise CommandError(
            f"{what} column(s) not in the file: {', '.join(missing)}; "
            f"available: {', '.join(map(str, df.columns))}"
        )


def _cmd_report(args, say):
    from .datasets import make_orchard_lots
    from .report import build_report, render_text, write_outputs

    if args.file is None:
        df = make_orchard_lots(400, random_state=args.seed)
        target = args.target or "storage_grade"
        source = (
            "DEMO DATA: an invented orchard intake log of 400 apple lots "
            f"(skbayeslogit.datasets, seed {args.seed}); no file given"
        )
        say("no file given: running on the built-in demo data (invented orchard intake log)")
    else:
        df = _read_csv(args.file)
        if not args.target:
            raise CommandError("--target is required with a file: name the label column.")
        target = args.target
        source = f"file {args.file} ({len(df)} rows)"
    _check_columns(df, [target], "target")
    features = _split(args.features)
    if features:
        _check_columns(df, features, "feature")
    models = _split(args.models)
    if not 0 < args.level < 1:
        raise CommandError(f"--level must be between 0 and 1; got {args.level}")
    report = build_report(
        df,
        target,
        features=features,
        models=models,
        level=args.level,
        cost_fp=args.cost_fp,
        cost_fn=args.cost_fn,
        cv=args.cv,
        random_state=args.seed,
        source=source,
        dropna=args.dropna,
        progress=say,
    )
    sys.stdout.write(render_text(report))
    if args.out:
        say(f"writing tables, figures, models and report.html to {args.out}")
        written = write_outputs(report, df, args.out)
        sys.stdout.write(
            f"\nwrote {len(written['csv'])} tables, {len(written['png'])} figures, "
            f"{len(written['model'])} models and {written['html'][0]}\n"
        )
    return 0


def _cmd_score(args, say):
    import joblib
    import numpy as np

    path = Path(args.model_file)
    if not path.is_file():
        raise CommandError(f"model file not found: {path}")
    try:
        saved = joblib.load(path)
    except Exception as exc:  # noqa: BLE001 - any unpickling failure is the same user error
        raise CommandError(f"cannot load a model from {path}: {exc}") from exc
    if not isinstance(saved, dict) or "model" not in saved:
        raise CommandError(f"{path} is not a model file written by 'skbayeslogit report --out'")
    model, features = saved["model"], saved["features"]
    df = _read_csv(args.file)
    missing = [c for c in features if c not in df.columns]
    if missing:
        raise CommandError(
            f"the new rows lack the model's feature column(s): {', '.join(missing)} "
            f"(the model uses {', '.join(features)})"
        )
    if not 0 < args.level < 1:
        raise CommandError(f"--level must be between 0 and 1; got {args.level}")
    from . import accessor  # noqa: F401

    say(f"scoring {len(df)} rows with the {saved.get('model_name', 'saved')} model")
    table = df.bayeslogit.predict_table(model, level=args.level)
    new_cols = [c for c in table.columns if c not in df.columns]
    out = table[new_cols]
    if args.out:
        out.to_csv(args.out, index=False)
        say(f"wrote {len(out)} predictions to {args.out}")
    else:
        with np.printoptions(precision=4):
            sys.stdout.write(out.to_string(index=False, float_format=lambda v: f"{v:.4f}") + "\n")
    return 0


def main(argv=None):
    """Entry point of the ``skbayeslogit`` command; returns the exit code."""
    args = _parser().parse_args(argv)

    def say(message):
        if not args.quiet:
            print(f"[skbayeslogit] {message}", file=sys.stderr, flush=True)

    try:
        if args.command == "report":
            return _cmd_report(args, say)
        return _cmd_score(args, say)
    except (CommandError, ValueError, KeyError, TypeError, ImportError) as exc:
        if args.debug:
            traceback.print_exc()
        message = exc.args[0] if isinstance(exc, KeyError) and exc.args else exc
        print(f"skbayeslogit: error: {message}", file=sys.stderr)
        return EXIT_USAGE


if __name__ == "__main__":  # pragma: no cover
    sys.exit(main())
