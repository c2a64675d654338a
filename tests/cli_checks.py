"""What the command-line tests share: a failed run's one-line error."""

from skbayeslogit.cli import main


def one_error_line(capsys, args):
    """Run the CLI with ``args``; assert exit code 2 and one error line; return that line."""
    code = main(args)
    err = capsys.readouterr().err
    lines = [ln for ln in err.strip().splitlines() if not ln.startswith("[skbayeslogit]")]
    assert code == 2, err
    assert len(lines) == 1 and lines[0].startswith("skbayeslogit: error:"), err
    return lines[0]
