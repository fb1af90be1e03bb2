"""Command-line entry point: parses arguments and calls the API. Heavy imports stay inside
the commands, so ``qualbayes lots`` with a conjugate prior never imports jax."""

from __future__ import annotations

import argparse
import importlib
import os
import sys

# One BLAS thread per interpreter thread, unless the user chose otherwise (before numpy is
# imported): the quadrature batch answers groups on one thread per CPU, and OpenBLAS's own
# threads on its small products then only compete for the same cores (50 parts x 200 lots
# on 2 cores: 6.8 CPU s and 3.5 s wall with them, 3.9 CPU s and 2.9 s without; docs/speed.md)
os.environ.setdefault("OPENBLAS_NUM_THREADS", "1")

from qualbayes.errors import (
    EXIT_INPUT,
    EXIT_INTERNAL,
    EXIT_REFUSED,
    InputError,
    OptionError,
    OutputExistsError,
)

#: Each module has ``register(subparsers)``; the parser it adds sets ``func(args) -> int``.
COMMAND_MODULES = (
    "qualbayes.commands.lots",
    "qualbayes.commands.life",
    "qualbayes.commands.plan",
    "qualbayes.commands.report",
    "qualbayes.commands.at_use",
    "qualbayes.commands.returns",
    "qualbayes.commands.suppliers",
    "qualbayes.commands.prepare",
)


class _Parser(argparse.ArgumentParser):
    """argparse with the typed text it echoes in errors escaped for the terminal."""

    def _print_message(self, message, file=None):
        if message:
            from qualbayes.evidence.terminal import escape_controls  # noqa: PLC0415

            (file or sys.stderr).write(escape_controls(message))


def build_parser() -> argparse.ArgumentParser:
    parser = _Parser(
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
    # One BLAS thread, set before numpy is first imported (the user's setting wins): the
    # quadrature engine's many small matrix products ran 2.4 times slower with OpenBLAS's
    # own threads waking for each (docs/speed.md, "Very large batches"); its groups run on
    # threads of their own instead.
    os.environ.setdefault("OPENBLAS_NUM_THREADS", "1")
    from qualbayes.inference.run import configure_process  # noqa: PLC0415 - environment only

    configure_process()  # the process is the command's: jax float64, CPU devices, cache
    parser = build_parser()
    args = parser.parse_args(argv)
    args.argv = list(sys.argv[1:] if argv is None else argv)
    from qualbayes import progress  # noqa: PLC0415

    progress.quiet(bool(getattr(args, "json", False)))  # --json: nothing but the document
    previous = _on_sigterm(_terminated)
    from qualbayes.commands.pipeline import input_paths  # noqa: PLC0415
    from qualbayes.evidence.files import protect_inputs, release_inputs  # noqa: PLC0415

    protect_inputs(*input_paths(args))
    try:
        return int(args.func(args) or 0)
    except (InputError, OptionError) as err:
        _say(f"qualbayes: error: {err}")
        _say("qualbayes: nothing was written.")
        return EXIT_INPUT
    except OutputExistsError as err:
        _say(f"qualbayes: {err}")
        return EXIT_REFUSED
    except OSError as err:  # writing the output failed (disk full, folder removed, ...)
        _say(f"qualbayes: error: cannot write the output: {err}")
        _say("qualbayes: files are written whole or not at all; no partial file was left.")
        return EXIT_INPUT
    except Exception as err:  # noqa: BLE001 - a bug: no traceback for the user, never exit 0-3
        if os.environ.get("QUALBAYES_DEBUG"):
            raise
        _say(f"qualbayes: internal error ({type(err).__name__}: {str(err)[:300]}). Nothing "
             "was written: files are written only once every result and page is complete. "
             "Please report this with the command line (set QUALBAYES_DEBUG=1 for details).")
        return EXIT_INTERNAL
    except KeyboardInterrupt:
        print("qualbayes: interrupted; no partial file was left (files are written whole "
              "or not at all).", file=sys.stderr)
        return 130
    finally:
        _on_sigterm(previous)
        release_inputs()


def _say(text: str) -> None:
    """A message on stderr, control characters escaped (file names come from users)."""
    from qualbayes.evidence.terminal import print_text  # noqa: PLC0415

    print_text(text, file=sys.stderr)


def _on_sigterm(handler):
    """Install ``handler`` for SIGTERM (main thread only); returns the previous one."""
    import signal  # noqa: PLC0415
    import threading  # noqa: PLC0415

    if handler is None or threading.current_thread() is not threading.main_thread():
        return None
    return signal.signal(signal.SIGTERM, handler)
