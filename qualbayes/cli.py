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
    "qualbayes.commands.suppliers",
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


def _terminated(signum, frame):
    raise KeyboardInterrupt  # unwind, so temporary output files are removed


def main(argv: list[str] | None = None) -> int:
    parser = build_parser()
    args = parser.parse_args(argv)
    args.argv = list(sys.argv[1:] if argv is None else argv)
    previous = _on_sigterm(_terminated)
    from qualbayes.evidence.files import protect_inputs, release_inputs  # noqa: PLC0415

    protect_inputs(getattr(args, "file", None))
    try:
        return int(args.func(args) or 0)
    except (InputError, OptionError) as err:
        print(f"qualbayes: error: {err}", file=sys.stderr)
        print("qualbayes: nothing was written.", file=sys.stderr)
        return EXIT_INPUT
    except OutputExistsError as err:
        print(f"qualbayes: {err}", file=sys.stderr)
        return EXIT_REFUSED
    except OSError as err:  # writing the output failed (disk full, folder removed, ...)
        print(f"qualbayes: error: cannot write the output: {err}", file=sys.stderr)
        print("qualbayes: files are written whole or not at all; no partial file was left.",
              file=sys.stderr)
        return EXIT_INPUT
    except KeyboardInterrupt:
        print("qualbayes: interrupted; no partial file was left (files are written whole "
              "or not at all).", file=sys.stderr)
        return 130
    finally:
        _on_sigterm(previous)
        release_inputs()


def _on_sigterm(handler):
    """Install ``handler`` for SIGTERM (main thread only); returns the previous one."""
    import signal  # noqa: PLC0415
    import threading  # noqa: PLC0415

    if handler is None or threading.current_thread() is not threading.main_thread():
        return None
    return signal.signal(signal.SIGTERM, handler)
