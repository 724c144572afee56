"""The ``rmkit`` command line: one module per subcommand under ``rmkit/commands``.

Start-up stays quick because heavy modules (xarray, numba, the solvers) are imported inside the
subcommand that needs them. Bad input ends with a one-line message and exit status 2.
"""

from __future__ import annotations

import argparse
import importlib
import sys

from rmkit._version import __version__
from rmkit.errors import InputError, SolverError

#: Subcommand modules, in the order ``rmkit --help`` lists them. Each defines
#: ``HELP``, ``add_arguments(parser)`` and ``run(args) -> int``.
COMMANDS = ("info", "bound", "bidprices", "simulate", "demo", "generate", "sweep", "compare",
            "calibrate", "methods")


def build_parser() -> argparse.ArgumentParser:
    parser = argparse.ArgumentParser(
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




def main(argv: list[str] | None = None) -> int:
    parser = build_parser()
    args = parser.parse_args(argv)
    if not getattr(args, "command", None):
        parser.print_help()
        return 2
    try:
        return int(args._run(args) or 0)
    except InputError as err:
        print(f"rmkit: error: {option_message(str(err), args._options)}", file=sys.stderr)
        return 2
    except SolverError as err:
        print(f"rmkit: solver failed: {err}", file=sys.stderr)
        return 1
    except KeyboardInterrupt:
        print("rmkit: interrupted", file=sys.stderr)
        return 130


if __name__ == "__main__":
    sys.exit(main())
