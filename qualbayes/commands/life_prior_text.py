"""``life`` prior options as text: ``--shape-prior 1.5,4``, ``--blife-prior 10:2000,8000``,
``--reliability-prior 5000:0.8,0.99`` -> :class:`~qualbayes.models.weibull_prior.LifePrior`
(errors name the option: this is the command layer)."""

from __future__ import annotations

import math

from qualbayes.errors import OptionError
from qualbayes.models.weibull_prior import Z975, LifePrior, lognormal_from_range


def two_numbers(text: str, option: str, example: str) -> tuple[float, float]:
    try:
        lo, hi = (float(v) for v in str(text).replace(" ", "").split(","))
    except ValueError:
        raise OptionError(f"{option} {text!r}: write two numbers LO,HI, e.g. {example}") from None
    if not (math.isfinite(lo) and math.isfinite(hi)):
        raise OptionError(f"{option} {text!r}: the numbers must be finite")
    if not lo < hi:
        raise OptionError(f"{option} {text!r}: LO must be smaller than HI")
    return lo, hi


def parse_shape_prior(text: str | None) -> tuple[tuple[float, float], tuple[float, float]] | None:
    """``1.5,4`` -> ((mean, sd) of log beta, (1.5, 4)); None when not given."""
    if text is None:
        return None
    lo, hi = two_numbers(text, "--shape-prior", "1.5,4")
    if lo <= 0:
        raise OptionError(f"--shape-prior {text!r}: the shape is positive; LO must be > 0")
    if hi / lo > 1e4:
        raise OptionError(f"--shape-prior {text!r}: a range wider than a factor 10,000 says "
                          "nothing; leave the option out for the default")
    return lognormal_from_range(lo, hi), (lo, hi)


def parse_blife_prior(text: str) -> tuple[float, float, float, str]:
    """``10:2000,8000`` (B10 life between 2000 and 8000 with 95%) -> (q, mean, sd, text)."""
    if ":" not in str(text):
        raise OptionError(f"--blife-prior {text!r}: write Q:LO,HI, e.g. 10:2000,8000 for "
                          "'B10 life between 2000 and 8000'")
    q_text, rng = str(text).split(":", 1)
    try:
        pct = float(q_text.strip().lstrip("Bb"))
    except ValueError:
        raise OptionError(f"--blife-prior {text!r}: {q_text!r} is not a percentage") from None
    if not 0 < pct < 100:
        raise OptionError(f"--blife-prior {text!r}: the B-life percentage must be in (0, 100)")
    lo, hi = two_numbers(rng, "--blife-prior", "10:2000,8000")
    if lo <= 0:
        raise OptionError(f"--blife-prior {text!r}: lives are positive; LO must be > 0")
    m, sd = lognormal_from_range(lo, hi)
    return pct / 100.0, m, sd, f"B{pct:g} life between {lo:g} and {hi:g} (central 95%)"


def parse_reliability_prior(text: str) -> tuple[float, float, float, str]:
    """``5000:0.8,0.99`` (R(5000) between 0.8 and 0.99 with 95%) -> (T, mean, sd, text)
    where mean, sd describe u = log(-log R(T))."""
    if ":" not in str(text):
        raise OptionError(f"--reliability-prior {text!r}: write T:LO,HI, e.g. 5000:0.8,0.99 for "
                          "'R(5000) between 0.8 and 0.99'")
    t_text, rng = str(text).split(":", 1)
    try:
        t = float(t_text)
    except ValueError:
        raise OptionError(f"--reliability-prior {text!r}: {t_text!r} is not a time") from None
    if not (t > 0 and math.isfinite(t)):
        raise OptionError(f"--reliability-prior {text!r}: the time must be positive")
    lo, hi = two_numbers(rng, "--reliability-prior", "5000:0.8,0.99")
    if not 0 < lo < hi < 1:
        raise OptionError(f"--reliability-prior {text!r}: reliabilities must lie strictly "
                          "between 0 and 1")
    u_lo, u_hi = math.log(-math.log(hi)), math.log(-math.log(lo))
    m = 0.5 * (u_lo + u_hi)
    sd = (u_hi - u_lo) / (2.0 * Z975)
    return t, m, sd, f"R({t:g}) between {lo:g} and {hi:g} (central 95%)"


def make_prior(shape: str | None = None, blife: str | None = None,
               reliability: str | None = None) -> LifePrior:
    """The prior from the command-line texts (each None when not given)."""
    if blife is not None and reliability is not None:
        raise OptionError("give at most one of --blife-prior and --reliability-prior")
    parsed = parse_shape_prior(shape)
    kwargs: dict = {}
    if parsed is not None:
        kwargs.update(shape=parsed[0], shape_given=True, shape_range=parsed[1])
    if blife is not None:
        q, m, sd, txt = parse_blife_prior(blife)
        kwargs.update(scale_kind="blife", scale_args=(q, m, sd), scale_text=txt)
    if reliability is not None:
        t, m, sd, txt = parse_reliability_prior(reliability)
        kwargs.update(scale_kind="reliability", scale_args=(t, m, sd), scale_text=txt)
    return LifePrior(**kwargs)
