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
from collections.abc import Sequence

from celllab import CAUTION, __version__
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
    """An ArgumentParser whose epilog may be a callable, called when the help is printed.

    Long help texts built from the catalog's columns or the topology registry (the filter
    language) then cost nothing at start-up: ``celllab --help`` and every other verb start
    without loading the physics behind them.
    """

    def format_help(self) -> str:
        if callable(self.epilog):
            self.epilog = self.epilog()
        return super().format_help()


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


def main(argv: Sequence[str] | None = None) -> int:
    parser = build_parser()
    args = parser.parse_args(argv)
    if not getattr(args, "func", None):
        parser.print_help()
        return 0
    try:
        return int(args.func(args) or 0)
    except CelllabError as exc:
        for problem in exc.problems:
            print(str(problem), file=sys.stderr)
        return 2
    except KeyboardInterrupt:
        print("interrupted", file=sys.stderr)
        return 130
    except BrokenPipeError:
        return 0


if __name__ == "__main__":  # pragma: no cover
    sys.exit(main())
