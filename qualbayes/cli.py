"""Command-line entry point: parses arguments and calls the API. Heavy imports stay inside
the commands, so ``qualbayes lots`` with a conjugate prior never imports jax."""

from __future__ import annotations

import argparse
import importlib
import sys

from qualbayes.errors import EXIT_INPUT, EXIT_REFUSED, InputError, OptionError, OutputExistsError

#: Each module has ``register(subparsers)``; the parser it adds sets ``func(args) -> int``.
COMMAND_MODULES = (
    "qualbayes.commands.lots",
    "qualbayes.commands.life",
    "qualbayes.commands.plan",
    "qualbayes.commands.report",
)


def build_parser() -> argparse.ArgumentParser:
    parser = argparse.ArgumentParser(
        prog="qualbayes",
        description="Bayesian lot acceptance, reliability and demonstration-test decisions "
                    "from inspection and life-test spreadsheets. Decision support only.")
    from qualbayes import __version__  # noqa: PLC0415

    parser.add_argument("--version", action="version", version=f"qualbayes {__version__}")
    sub = parser.add_subparsers(dest="command", metavar="COMMAND", required=True)
    for name in COMMAND_MODULES:
        try:
            module = importlib.import_module(name)
        except ModuleNotFoundError as err:
            if err.name == name:
                continue  # command not built yet
            raise
        module.register(sub)
    return parser


def main(argv: list[str] | None = None) -> int:
    parser = build_parser()
    args = parser.parse_args(argv)
    args.argv = list(sys.argv[1:] if argv is None else argv)
    try:
        return int(args.func(args) or 0)
    except (InputError, OptionError) as err:
        print(f"qualbayes: error: {err}", file=sys.stderr)
        print("qualbayes: nothing was written.", file=sys.stderr)
        return EXIT_INPUT
    except OutputExistsError as err:
        print(f"qualbayes: {err}", file=sys.stderr)
        return EXIT_REFUSED
    except KeyboardInterrupt:
        print("qualbayes: interrupted; no output was written or changed.", file=sys.stderr)
        return 130
