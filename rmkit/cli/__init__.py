"""The ``rmkit`` command line: one module per subcommand under ``rmkit/commands``.

Start-up stays quick because heavy modules (xarray, numba, the solvers) are imported inside the
subcommand that needs them. Bad input ends with a one-line message and exit status 2.
"""

from __future__ import annotations

import argparse
import importlib
import sys

from rmkit._version import __version__
from rmkit.cli._common import Parser, join_negative_values
from rmkit.errors import InputError, ProblemTooLargeError, SolverError

#: Subcommand modules, in the order ``rmkit --help`` lists them. Each defines
#: ``HELP``, ``add_arguments(parser)`` and ``run(args) -> int``.
COMMANDS = ("info", "bound", "bidprices", "simulate", "demo", "generate", "sweep", "compare",
            "calibrate", "methods")


def build_parser() -> argparse.ArgumentParser:
    parser = Parser(
        prog="rmkit",
        description="Bid prices, bounds and booking-control simulation for network revenue "
        "management. Results are model estimates: validate them before steering real sales.",
    )
    parser.add_argument("--version", action="version", version=f"rmkit {__version__}")
    sub = parser.add_subparsers(dest="command", metavar="COMMAND")
    for name in COMMANDS:
        module = importlib.import_module(f"rmkit.cli.{name}")
        p = sub.add_parser(name, help=module.HELP, description=module.HELP)
        module.add_arguments(p)
        p.set_defaults(_run=module.run, _options=getattr(module, "OPTIONS", {}))
    return parser


def option_message(message: str, options: dict[str, str]) -> str:
    """A library message names its own field (``store: ...``, ``ranges['x']: ...``); on the
    command line the same thing is an option, so name the option the user typed instead."""
    for field, option in options.items():
        for sep in (":", "["):
            if message.startswith(field + sep):
                return option + message[len(field):]
    return message


def error_line(err: InputError, args: argparse.Namespace | None) -> str:
    """The one line printed for bad input: the library's field mapped to the option typed, a
    size refusal about the scenario prefixed with its file, and never a line break."""
    message = option_message(str(err), getattr(args, "_options", {}) or {})
    scenario = getattr(args, "scenario", None)
    if (isinstance(err, ProblemTooLargeError) and scenario and not message.startswith("-")
            and not message.startswith(str(scenario))):
        message = f"{scenario}: {message}"
    return " ".join(message.split("\n"))


def main(argv: list[str] | None = None) -> int:
    parser = build_parser()
    args = None
    try:
        args = parser.parse_args(join_negative_values(sys.argv[1:] if argv is None else argv))
        if not getattr(args, "command", None):
            parser.print_help()
            return 2
        return int(args._run(args) or 0)
    except InputError as err:
        print(f"rmkit: error: {error_line(err, args)}", file=sys.stderr)
        return 2
    except SolverError as err:
        print(f"rmkit: solver failed: {err}", file=sys.stderr)
        return 1
    except KeyboardInterrupt:
        print("rmkit: interrupted", file=sys.stderr)
        return 130


if __name__ == "__main__":
    sys.exit(main())
