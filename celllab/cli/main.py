"""Entry point of the ``celllab`` command.

Each verb lives in a small module of this package that exposes ``register(subparsers)``;
the module adds its sub-parser and sets ``func`` to a callable ``(args) -> int``.
Library errors (``CelllabError``) are printed one problem per line on stderr, exit status 2,
never a traceback.
"""

from __future__ import annotations

import argparse
import importlib
import sys
import warnings
from collections.abc import Sequence
from typing import Any

from celllab import CAUTION, __version__
from celllab.cli.text import printable
from celllab.errors import CelllabError

#: Verb modules, in the order their verbs appear in ``--help``.
VERB_MODULES: tuple[str, ...] = (
    "celllab.cli.build",
    "celllab.cli.query",
    "celllab.cli.export",
    "celllab.cli.plan",
    "celllab.cli.afford",
    "celllab.cli.ui",
)



class HelpOnDemandParser(argparse.ArgumentParser):
    """An ArgumentParser whose epilog may be a callable, called when the help is printed, and
    whose messages are escaped.

    Long help texts built from the catalog's columns or the topology registry (the filter
    language) then cost nothing at start-up: ``celllab --help`` and every other verb start
    without loading the physics behind them. A usage error quotes the argument given, and that
    text must not reach the terminal raw (an escape sequence, a bidirectional override).
    """

    def format_help(self) -> str:
        if callable(self.epilog):
            self.epilog = self.epilog()
        return super().format_help()

    def _print_message(self, message: str, file: Any = None) -> None:
        super()._print_message(printable(message, keep_newlines=True), file)


def build_parser() -> argparse.ArgumentParser:
    parser = HelpOnDemandParser(
        prog="celllab",
        description="Characterize on-chip decoupling cells from a process deck and keep the "
        "results in a searchable catalog.",
        epilog=CAUTION,
    )
    parser.add_argument("--version", action="version", version=f"celllab {__version__}")
    sub = parser.add_subparsers(dest="verb", metavar="VERB")
    for modname in VERB_MODULES:
        try:
            module = importlib.import_module(modname)
        except ModuleNotFoundError as exc:  # a verb module not written yet
            if exc.name == modname:
                continue
            raise
        module.register(sub)
    return parser


#: Problems printed for one error before the rest are summed up in one line.
MAX_PRINTED_PROBLEMS = 100


def _undecodable(argv: Sequence[str]) -> list[str]:
    """Lines about arguments that are not UTF-8 text (bytes Python could only carry as
    surrogate escapes); celllab reads its arguments, file names included, as UTF-8."""
    out = []
    for i, arg in enumerate(argv, start=1):
        try:
            arg.encode("utf-8")
        except UnicodeEncodeError:
            out.append(f"command line: argument {i} = '{printable(arg)}' -> not valid UTF-8 text; "
                       "give names and paths in UTF-8")
    return out


def _report(problems: Sequence[object]) -> None:
    for problem in problems[:MAX_PRINTED_PROBLEMS]:
        print(printable(problem, keep_newlines=True), file=sys.stderr)
    if len(problems) > MAX_PRINTED_PROBLEMS:
        print(f"... and {len(problems) - MAX_PRINTED_PROBLEMS} more problems", file=sys.stderr)


def _os_problem(exc: OSError) -> str:
    # an OS error without a file name comes from writing the report (a full disk under stdout)
    where = exc.filename if exc.filename is not None else "standard output"
    return f"{printable(where)}: {exc.strerror or exc}"


def main(argv: Sequence[str] | None = None) -> int:
    """Run one command line; the exit status: 0 done, 2 bad input (problems on stderr), 130
    interrupted (Ctrl-C at any point, loading included: a catalog write in progress is rolled
    back whole by SQLite)."""
    try:
        return _main(argv)
    except KeyboardInterrupt:
        print("interrupted", file=sys.stderr)
        return 130


def _main(argv: Sequence[str] | None) -> int:
    for stream in (sys.stdout, sys.stderr):  # never fail on a character the terminal lacks
        if hasattr(stream, "reconfigure"):
            stream.reconfigure(errors="backslashreplace")
    argv = list(sys.argv[1:] if argv is None else argv)
    if bad := _undecodable(argv):
        _report(bad)
        return 2
    parser = build_parser()
    try:
        args = parser.parse_args(argv)
    except SystemExit as exc:  # --help and --version end here with 0; a usage error with 2
        if exc.code in (0, None):
            raise
        return int(exc.code) if isinstance(exc.code, int) else 2
    if not getattr(args, "func", None):
        parser.print_help()
        return 0
    try:
        with warnings.catch_warnings():
            # a model outside its range is a flag stored with the row, not a console warning
            warnings.simplefilter("ignore", RuntimeWarning)
            return int(args.func(args) or 0)
    except CelllabError as exc:
        _report(exc.problems)
        return 2
    except BrokenPipeError:
        return 0
    except OSError as exc:  # a file the OS refused (permissions, a full disk, a path under /proc)
        _report([_os_problem(exc)])
        return 2


if __name__ == "__main__":  # pragma: no cover
    sys.exit(main())
