"""Command-line entry point: parses arguments and dispatches to one module
per command.  Commands stay thin: they call the library layers and print.

Each command lives in ``gainloom.cli.<name>`` and defines ``HELP`` (one
line), ``add_arguments(parser)`` and ``run(args) -> int``.
"""

from __future__ import annotations

import argparse
import importlib
import os
import sys

from ..errors import GainloomError
from ..outputs import describe_os_error
from ..version import __version__

__all__ = ["COMMANDS", "main"]

#: Registered commands, in the order ``--help`` lists them.
COMMANDS: tuple[str, ...] = (
    "inspect",
    "discretize",
    "locus",
    "design",
    "verify",
    "emit",
    "simulate",
    "spread",
    "family",
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
    code = None
    try:
        code = int(args.run(args))
        sys.stdout.flush()  # a closed pipe shows here, not at interpreter exit
        return code
    except BrokenPipeError:
        return _reader_gone(code)
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


#: Exit code when the reader of stdout went away before the command finished
#: printing: 128 + SIGPIPE, what a shell reports for a process a closed pipe
#: ended (common practice, no source).
CLOSED_PIPE_EXIT = 141


def _reader_gone(code: int | None) -> int:
    """``gainloom ... | head``: stop printing quietly, no traceback.

    Further writes to stdout (Python flushes it at exit) go to the null
    device.  The command's own exit code is kept when it had one.
    """
    try:
        devnull = os.open(os.devnull, os.O_WRONLY)
        os.dup2(devnull, sys.stdout.fileno())
        os.close(devnull)
    except (OSError, ValueError, AttributeError):  # stdout without a descriptor (e.g. captured)
        pass
    return CLOSED_PIPE_EXIT if code is None else code
