"""The ``speciakin`` command.

Each sub-command lives in its own module ``speciakin.cli.cmd_<name>`` that
defines::

    NAME = "fit"                      # the sub-command
    HELP = "one line for the list"
    def add_arguments(parser): ...    # argparse options (epilog with an example)
    def run(args) -> int: ...         # does the work, returns the exit code

``COMMANDS`` below is the one list of sub-commands, in the order a chemist
meets them.  Modules import heavy libraries inside ``run`` so that
``speciakin --help`` stays fast.  Any :class:`speciakin.errors.SpeciakinError`
becomes a short message on stderr and its exit code, never a traceback.
"""

from __future__ import annotations

import argparse
import importlib
import logging
import os
import sys

from speciakin import __version__
from speciakin.errors import SpeciakinError

#: Sub-commands in the order of the chemist's journey.
COMMANDS = (
    "new", "check", "look", "speciate", "titrate", "simulate", "fit", "compare",
    "sample", "window", "suggest", "report", "run", "history", "contrast", "demo", "web",
)


def _load(name: str):
    try:
        return importlib.import_module(f"speciakin.cli.cmd_{name}")
    except ModuleNotFoundError as exc:  # a sub-command not built yet
        if exc.name == f"speciakin.cli.cmd_{name}":
            return None
        raise


def build_parser() -> argparse.ArgumentParser:
    parser = argparse.ArgumentParser(
        prog="speciakin",
        description="Fit pH-dependent competing reactions to lab runs and find the pH window "
                    "that meets spec.",
        formatter_class=argparse.RawDescriptionHelpFormatter,
        epilog="Start with:  speciakin new my-campaign",
    )
    parser.add_argument("--version", action="version", version=f"speciakin {__version__}")
    parser.add_argument("--debug", action="store_true",
                        help="show the full traceback of an error (for developers)")
    sub = parser.add_subparsers(dest="command", metavar="COMMAND")
    for name in COMMANDS:
        module = _load(name)
        if module is None:
            continue
        p = sub.add_parser(module.NAME, help=module.HELP, description=module.HELP,
                           formatter_class=argparse.RawDescriptionHelpFormatter)
        module.add_arguments(p)
        p.set_defaults(_module=module)
    return parser


class _StderrHandler(logging.StreamHandler):
    """A handler writing to the ``sys.stderr`` of the moment, not of its creation
    (a notebook, a test or an embedding program may replace ``sys.stderr``; a
    closed earlier stream must not turn a note into a logging error)."""

    @property
    def stream(self):
        return sys.stderr

    @stream.setter
    def stream(self, value):  # StreamHandler.__init__ sets it; the live sys.stderr wins
        pass


def show_notes() -> None:
    """Show the library's notes (logger ``speciakin``, level INFO; e.g. that the
    kernel compiles) on stderr as ``speciakin: ...``."""
    notes = logging.getLogger("speciakin")
    if not notes.handlers:
        handler = _StderrHandler()
        handler.setFormatter(logging.Formatter("speciakin: %(message)s"))
        notes.addHandler(handler)
        notes.setLevel(logging.INFO)


def main(argv: list[str] | None = None) -> int:
    os.environ.setdefault("MPLBACKEND", "Agg")
    show_notes()
    parser = build_parser()
    args = parser.parse_args(argv)
    if not getattr(args, "_module", None):
        parser.print_help()
        return 2
    try:
        code = args._module.run(args)
    except SpeciakinError as exc:
        if args.debug:
            raise
        print(f"speciakin {args.command}: error: {exc}", file=sys.stderr)
        return exc.exit_code
    except KeyboardInterrupt:
        print(f"speciakin {args.command}: interrupted", file=sys.stderr)
        return 130
    return int(code or 0)


if __name__ == "__main__":  # pragma: no cover
    sys.exit(main())
