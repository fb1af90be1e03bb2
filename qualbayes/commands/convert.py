"""Every text-to-value converter of the command line, once.

Each takes the text typed after an option and the option's name, and returns a typed value
or raises :class:`~qualbayes.errors.OptionError` naming the option (exit 2). The library
functions they call (``questions.parse_rate``, ``data.columns.parse_mapping``, ...) stay where
they are, for Python callers.

Ranges chosen here (docs/architecture.md): ``--confidence`` lies strictly between 0.5 and 1
(a confidence at or below one half decides nothing: both verdicts could hold at once);
``--seed`` is a whole number in [0, 2**32); counts are whole numbers; positive quantities
are finite and above zero.
"""

from __future__ import annotations

import re

from qualbayes.errors import OptionError
from qualbayes.parameters import MAX_SEED

#: --failures gives one table row per count: a bound keeps a typo from asking for millions.
MAX_FAILURE_ROWS = 200
MAX_FAILURES = 100_000


def rate(text: str, option: str = "--spec") -> float:
    """A defect-rate limit as 0.01, 1% or 10000ppm."""
    from qualbayes.questions import parse_rate  # noqa: PLC0415

    return parse_rate(text, option)


def probability(text, option: str) -> float:
    """A probability strictly inside (0, 1); 90% is accepted."""
    from qualbayes.questions import parse_probability  # noqa: PLC0415

    if len(str(text)) > 64:
        raise OptionError(f"{option}: expected a number such as 0.95 or 95%")
    return parse_probability(text, option)


def confidence(text, option: str = "--confidence") -> float:
    """A confidence strictly between 0.5 and 1."""
    value = probability(text, option)
    if not value > 0.5:
        raise OptionError(f"{option} {text!r}: a confidence must lie strictly between 0.5 and "
                          "1 (e.g. 0.9 or 95%); at or below one half it decides nothing")
    return value


def seed(value) -> int:
    """The sampler's seed: a whole number in [0, 2**32)."""
    if isinstance(value, bool) or not isinstance(value, int) or not 0 <= value < MAX_SEED:
        raise OptionError(f"--seed {value!r}: give a whole number from 0 to {MAX_SEED - 1}")
    return value


def mission(text: str, option: str = "--mission") -> float:
    """A positive, finite time in the units of the data file."""
    from qualbayes.data.values import parse_real  # noqa: PLC0415

    try:
        value = parse_real(str(text))
    except ValueError as err:
        why = (str(err).replace(" in the file", "") if "could be" in str(err)
               else "expected a positive number such as 5000")
        raise OptionError(f"{option} {text!r}: {why}") from None
    if value <= 0:
        raise OptionError(f"{option} {text!r}: the mission time must be positive")
    return value


def columns(text: str | None, option: str = "--columns") -> dict[str, str]:
    """A column mapping ``key=Header,...`` (checked against the file's schema later)."""
    from qualbayes.data.columns import parse_mapping  # noqa: PLC0415

    if text is not None and len(text) > 4000:
        raise OptionError(f"{option}: the mapping is longer than 4000 characters")
    return parse_mapping(text)


def units(text: str | None) -> str:
    """A display label for time ('h', 'cycles', 'km')."""
    from qualbayes.data.life import parse_units  # noqa: PLC0415

    return parse_units(text)


def max_rows(value) -> int:
    if isinstance(value, bool) or not isinstance(value, int) or value < 1:
        raise OptionError(f"--max-rows {value!r}: give a whole number of at least 1")
    return value


def shared(args) -> float:
    """The options every data command shares, checked before any work (confidence, seed,
    row limit); returns the confidence."""
    seed(args.seed)
    max_rows(args.max_rows)
    return confidence(args.confidence)


_NUM = r"[0-9]*\.?[0-9]+(?:[eE][-+]?[0-9]+)?"


def parse_number(text: str, option: str) -> float:
    t = str(text).strip()
    if len(t) > 64 or not re.fullmatch(_NUM, t):
        raise OptionError(f"{option} {text!r}: expected a positive number such as 600")
    value = float(t)
    if not value > 0 or value == float("inf"):
        raise OptionError(f"{option} {text!r}: must be greater than 0")
    return value


def parse_whole(text: str, option: str, least: int = 0) -> int:
    t = str(text).strip()
    if not re.fullmatch(r"-?[0-9]+", t):
        raise OptionError(f"{option} {text!r}: expected a whole number")
    if len(t.lstrip("-0")) > 15:
        raise OptionError(f"{option}: {t[:20]}... is too large a whole number")
    value = int(t)
    if value < least:
        raise OptionError(f"{option} {text!r}: " + ("a count cannot be negative" if least == 0
                                                    else f"must be at least {least}"))
    return value


def parse_failures(text: str) -> list[int]:
    """``K`` -> 0..K, ``A..B`` -> A..B, ``A,B,C`` -> that list."""
    t = str(text).strip()
    if ".." in t:
        lo, _, hi = t.partition("..")
        a, b = parse_whole(lo, "--failures"), parse_whole(hi, "--failures")
        if b < a:
            raise OptionError(f"--failures {text!r}: the range must run upwards, e.g. 0..3")
        out = list(range(a, min(b, a + MAX_FAILURE_ROWS) + 1))
    elif "," in t:
        out = sorted({parse_whole(v, "--failures") for v in t.split(",")[:MAX_FAILURE_ROWS + 1]})
    else:
        k = parse_whole(t, "--failures")
        out = list(range(min(k, MAX_FAILURE_ROWS) + 1))
    if len(out) > MAX_FAILURE_ROWS or out[-1] > MAX_FAILURES:
        raise OptionError(f"--failures {text!r}: at most {MAX_FAILURE_ROWS} rows of allowed "
                          f"failures, each at most {MAX_FAILURES}")
    return out


def parse_pair(text: str, option: str, prefix: str) -> tuple[float, float]:
    t = str(text).strip().lower()
    if t.startswith(prefix + ":"):
        t = t[len(prefix) + 1:]
    parts = t.split(",")
    if len(parts) != 2:
        raise OptionError(f"{option} {text!r}: write {prefix}:A,B with two positive numbers")
    a, b = (parse_number(v, option) for v in parts)
    if a > 1e9 or b > 1e12:
        raise OptionError(f"{option} {text!r}: A and B are implausibly large")
    return a, b


def parse_reliability_prior(text: str, option: str, on_reliability: bool = True):
    """A Beta prior as typed: on R (attribute, life) or on the defect rate (sampling).
    Returns a RatePrior, or the strings 'history' / 'none' / 'same'."""
    from qualbayes.planning.rate_prior import RatePrior  # noqa: PLC0415

    t = str(text).strip().lower()
    if t in ("history", "none", "same"):
        return t
    make = RatePrior.on_reliability if on_reliability else RatePrior.beta
    what = "R" if on_reliability else "p"
    if t == "uniform":
        return make(1.0, 1.0, f"uniform: {what} ~ Beta(1, 1)")
    if t == "jeffreys":
        return make(0.5, 0.5, f"jeffreys: {what} ~ Beta(0.5, 0.5)")
    a, b = parse_pair(text, option, "beta")
    return make(a, b)


def parse_gamma(text: str, option: str):
    from qualbayes.planning.mtbf import GammaPrior  # noqa: PLC0415

    if str(text).strip().lower() == "same":
        return "same"
    a, b = parse_pair(text, option, "gamma")
    return GammaPrior(a, b)


def optional_probability(text, option):
    """A probability option that may be absent; ``--confidence`` gets its own range."""
    if text is None:
        return None
    return confidence(text, option) if option == "--confidence" else probability(text, option)




# ----------------------------------------------------------------------------- at-use, returns

def positive(text, option: str, example: str = "300") -> float:
    """A positive, finite quantity (usage per period, a use stress other than temperature)."""
    from qualbayes.data.values import parse_real  # noqa: PLC0415

    if len(str(text)) > 64:
        raise OptionError(f"{option}: expected a positive number such as {example}")
    try:
        value = parse_real(str(text).strip())
    except ValueError as err:
        why = (str(err).replace(" in the file", "") if "could be" in str(err)
               else f"expected a positive number such as {example}")
        raise OptionError(f"{option} {text!r}: {why}") from None
    if not (value > 0 and value != float("inf")):
        raise OptionError(f"{option} {text!r}: must be a positive number")
    return value


def temperature(text, option: str = "--use") -> float:
    """A temperature with its unit ('40C', '313.15K') -> kelvin; a bare number is refused."""
    from qualbayes.data.stress_life import parse_use_temperature  # noqa: PLC0415

    if len(str(text)) > 64:
        raise OptionError(f"{option}: write a temperature with its unit, e.g. 40C or 313.15K")
    return parse_use_temperature(text, option)


def stress_level(text, relation: str, option: str = "--use") -> float:
    """The use value of a stress: a temperature with its unit for Arrhenius, else a number."""
    from qualbayes.data.stress_life import parse_use_value  # noqa: PLC0415

    if relation == "arrhenius":
        return temperature(text, option)
    if len(str(text)) > 64:
        raise OptionError(f"{option}: expected a number such as 12")
    return parse_use_value(text, option)


def value_range(text, option: str, example: str) -> tuple[float, float]:
    """``LO,HI`` -> (lo, hi), finite and increasing (a 95% range of engineering knowledge)."""
    from qualbayes.commands.life_prior_text import two_numbers  # noqa: PLC0415

    if len(str(text)) > 128:
        raise OptionError(f"{option}: write two numbers LO,HI, e.g. {example}")
    return two_numbers(text, option, example)


def horizon(value) -> int:
    """The number of periods to forecast: a whole number from 1 to 600."""
    if isinstance(value, bool) or not isinstance(value, int) or not 1 <= value <= 600:
        raise OptionError(f"--horizon {value!r}: give a whole number of periods, 1 to 600")
    return value


def spares(value) -> int | None:
    """Spare units in stock (optional): a whole number, 0 or more."""
    if value is None:
        return None
    if isinstance(value, bool) or not isinstance(value, int) or value < 0:
        raise OptionError(f"--spares {value!r}: give a whole number of units, 0 or more")
    return value


def as_of(text):
    """The date the installed base was counted (YYYY-MM-DD), or None."""
    from qualbayes.data.fleet import parse_as_of  # noqa: PLC0415

    if text is not None and len(str(text)) > 64:
        raise OptionError("--as-of: write a date as YYYY-MM-DD")
    return parse_as_of(text)


def engine_options(engine: str, processes, scheduler, history: bool) -> dict:
    """``--engine``, ``--processes`` and ``--scheduler`` of ``lots`` as keyword arguments:
    the quadrature engine only answers the history prior, and only it is split."""
    if engine == "quadrature" and not history:
        raise OptionError("--engine quadrature answers the history prior: use it with --prior "
                          "history (a Beta prior has a closed form)")
    if (processes is not None or scheduler is not None) and engine != "quadrature":
        raise OptionError("--processes and --scheduler split the quadrature batch: use them "
                          "with --engine quadrature")
    if processes is not None and scheduler is not None:
        raise OptionError("--processes starts processes on this machine, --scheduler uses a "
                          "running cluster: give one of them")
    count = None if processes is None else parse_whole(processes, "--processes", least=1)
    if count is not None and count > 1024:
        raise OptionError(f"--processes {processes!r}: at most 1024")
    if scheduler is not None and (len(scheduler) > 300 or not re.fullmatch(
            r"(tcp|tls|inproc|ucx)://[^\s]+", scheduler.strip())):
        raise OptionError(f"--scheduler {scheduler!r}: a Dask scheduler address such as "
                          "tcp://10.0.0.5:8786")
    return {"engine": engine, "processes": count,
            "scheduler": None if scheduler is None else scheduler.strip()}
