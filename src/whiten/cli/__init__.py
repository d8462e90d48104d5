"""The ``whiten`` command line: one module per command, each thin.

Every command module defines ``add_parser(subparsers)``, which registers its
sub-parser and sets ``func`` (a callable taking the parsed arguments and
returning an exit code). Exit codes: 0 success, 1 data or numerical error
(one line on stderr, no traceback), 2 usage error (argparse), 130 interrupted
(SIGINT), 143 terminated (SIGTERM); an interrupted or terminated run leaves no
temporary file behind.

Messages shared with the API name both spellings, the command line's first:
``--force (force=True in Python)``. The command line prints them without the
``(... in Python)`` part (:func:`cli_words`), so a command-line user reads
command-line words only.
"""

from __future__ import annotations

import argparse
import importlib
import re
import sys
import warnings

from .._version import __version__
from ..errors import NumericalWarning, WhitenError

# Commands in the order `whiten --help` lists them. A module that is not
# present yet (a command still being built) is skipped.
COMMANDS = ["demo", "baseline", "score", "inspect", "regress", "loglik"]

DESCRIPTION = """\
Gaussian-model statistics without matrix inverses: fit a reference model of
healthy operation, score new sensor rows against it, fit regressions on
nearly collinear features, evaluate Gaussian log-likelihoods. Every answer
says how many digits it can be trusted to.
"""

EPILOG = """\
Start with `whiten demo --out demo-output` to see a complete run on bundled
data. `whiten COMMAND --help` explains each command with an example.
"""


def build_parser() -> argparse.ArgumentParser:
    parser = argparse.ArgumentParser(
        prog="whiten", description=DESCRIPTION, epilog=EPILOG,
        formatter_class=argparse.RawDescriptionHelpFormatter)
    parser.add_argument("--version", action="version", version=f"whiten {__version__}")
    sub = parser.add_subparsers(dest="command", metavar="COMMAND")
    for name in COMMANDS:
        try:
            mod = importlib.import_module(f"{__name__}.{name}")
        except ModuleNotFoundError as exc:
            if exc.name == f"{__name__}.{name}":
                continue
            raise
        mod.add_parser(sub)
    return parser


def add_reader_options(p) -> None:
    """``--sep`` and ``--decimal``: how a text table separates fields and writes decimals."""
    p.add_argument("--sep", metavar="CHAR", default=None,
                   help="field separator of the data file: one character, or 'tab' (default: ',' and a tab "
                        "for .tsv); European spreadsheet exports use --sep ';' --decimal ','")
    p.add_argument("--decimal", choices=[".", ","], default=None,
                   help="decimal mark of the data file (default '.'); no thousands separator is ever read")
    p.add_argument("--na-values", metavar="CODE,...", default=None,
                   help="codes that mean a missing reading, comma-separated, e.g. --na-values=-9999,ERR,n/a (with '=' "
                        "when the first code starts with '-'); an empty cell is always missing; `whiten score` "
                        "defaults to the model's codes")


def add_progress_options(p) -> None:
    """``--quiet``: no progress on standard error (the summary on standard output stays)."""
    p.add_argument("--quiet", action="store_true",
                   help="no progress on standard error (a bar on a terminal, else a line about every 10 s); "
                        "e.g. --quiet in a cron job")


def progress_of(args) -> bool | None:
    """The ``progress=`` of a library call for a command: False with --quiet, else None (decide by stderr)."""
    return False if getattr(args, "quiet", False) else None


def command_words(args) -> str:
    """The command line as it was run (``whiten baseline healthy.csv -o m.json ...``), quoted for a shell."""
    import shlex

    return "whiten " + " ".join(shlex.quote(a) for a in getattr(args, "_argv", []))


def open_data(args, path=None, *, na_values: bool = True):
    """The data file of a command opened by the one reader, with its --sep/--decimal (and --na-values,
    unless ``na_values=False``: the library then applies them, or the model's)."""
    from ..io.tables import open_table

    return open_table(args.data if path is None else path, sep=getattr(args, "sep", None),
                      decimal=getattr(args, "decimal", None),
                      na_values=getattr(args, "na_values", None) if na_values else None)


_PYTHON_ONLY = re.compile(r" \([^()]*\bin Python\)")


def cli_words(message: object) -> str:
    """A message for the command line: the ``(... in Python)`` asides removed, control characters escaped."""
    text = _PYTHON_ONLY.sub("", str(message))
    return "".join(ch if ch.isprintable() else repr(ch)[1:-1] for ch in text)


def _show_warning(message, category, filename, lineno, file=None, line=None):
    tag = "warning" if not issubclass(category, NumericalWarning) else "numerical warning"
    print(f"whiten: {tag}: {cli_words(message)}", file=sys.stderr)


class Terminated(KeyboardInterrupt):
    """SIGTERM turned into an exception, so temporary files are removed on the way out."""


def _on_sigterm(signum, frame):
    raise Terminated()


def _sigterm_handler():
    """Install the SIGTERM handler (main thread only); returns the previous one, or None."""
    import signal
    import threading

    if threading.current_thread() is not threading.main_thread():
        return None
    try:
        return signal.signal(signal.SIGTERM, _on_sigterm)
    except (ValueError, OSError):  # pragma: no cover - not the main interpreter
        return None


def main(argv: list[str] | None = None) -> int:
    parser = build_parser()
    args = parser.parse_args(argv)
    args._argv = list(sys.argv[1:] if argv is None else argv)  # for the "what was run" block of --report
    if not getattr(args, "func", None):
        parser.print_help()
        return 2
    saved = warnings.showwarning
    warnings.showwarning = _show_warning
    old_term = _sigterm_handler()
    try:
        return int(args.func(args) or 0)
    except WhitenError as exc:
        print(f"whiten {args.command}: error: {cli_words(exc)}", file=sys.stderr)
        return 1
    except FileNotFoundError as exc:
        print(f"whiten {args.command}: error: file not found: {exc.filename or exc}", file=sys.stderr)
        return 1
    except (PermissionError, IsADirectoryError) as exc:
        print(f"whiten {args.command}: error: cannot use {exc.filename!r}: {exc.strerror}", file=sys.stderr)
        return 1
    except BrokenPipeError:
        # the reader went away (e.g. `whiten inspect m.json | head`): stop quietly, as the
        # Python documentation recommends, without a traceback at interpreter exit
        import os

        devnull = os.open(os.devnull, os.O_WRONLY)
        os.dup2(devnull, sys.stdout.fileno())
        return 1
    except Terminated:
        print(f"whiten {args.command}: terminated; no output written", file=sys.stderr)
        return 143
    except KeyboardInterrupt:
        print(f"whiten {args.command}: interrupted; no output written", file=sys.stderr)
        return 130
    finally:
        warnings.showwarning = saved
        if old_term is not None:
            import signal

            signal.signal(signal.SIGTERM, old_term)


if __name__ == "__main__":  # pragma: no cover
    sys.exit(main())
