"""Command-line entry point: parses arguments and dispatches to one module
per command.  Commands stay thin: they call the library layers and print.

Each command lives in ``gainloom.cli.<name>`` and defines ``HELP`` (one
line), ``add_arguments(parser)`` and ``run(args) -> int``.
"""

from __future__ import annotations

import argparse
import importlib
import sys

from .. import __version__
from ..errors import GainloomError
from ..outputs import describe_os_error

__all__ = ["main", "COMMANDS"]

#: Registered commands, in the order ``--help`` lists them.
COMMANDS: tuple[str, ...] = (
    "inspect",
    "discretize",
    "locus",
    "design",
    "verify",
    "emit",
    "simulate",
)


def build_parser() -> argparse.ArgumentParser:
    """Return the top-level parser with every registered command."""
    parser = argparse.ArgumentParser(
        prog="gainloom",
        description="Gain-scheduled controller design across operating points, "
        "in the s- and z-planes, with checked C lookup tables.",
    )
    parser.add_argument("--version", action="version", version=f"gainloom {__version__}")
    commands = parser.add_subparsers(dest="command", metavar="COMMAND")
    for name in COMMANDS:
        module = importlib.import_module(f"{__name__}.{name}")
        sub = commands.add_parser(name, help=module.HELP, description=module.HELP)
        module.add_arguments(sub)
        sub.set_defaults(run=module.run)
    return parser


def main(argv: list[str] | None = None) -> int:
    """Run the CLI; return the process exit code.

    Exit codes: 0 all passed, 1 some spec failed, 2 bad input or a file
    system that refused a write (one line on stderr, no traceback).
    """
    parser = build_parser()
    args = parser.parse_args(argv)
    if not getattr(args, "run", None):
        parser.print_help()
        return 2
    try:
        return int(args.run(args))
    except GainloomError as error:
        print(f"gainloom {args.command}: error: {error}", file=sys.stderr)
        return error.exit_code
    except OSError as error:
        # the system refused (disk full, no permission, ...): one line, not a bug
        print(f"gainloom {args.command}: error: {describe_os_error(error)}", file=sys.stderr)
        return 2
    except KeyboardInterrupt:
        print("gainloom: interrupted", file=sys.stderr)
        return 130
