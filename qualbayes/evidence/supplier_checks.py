"""A supplier scorecard record read back: every call must follow from its recorded
probability, Monte Carlo error, confidence and convergence gate.

Called by :func:`qualbayes.evidence.run_record.check_decisions` after the record's digest and
schema were checked. The rule is the scorecard's own (``inference.mcse.decide_within_error``):
a call needs its probability more than 3 MCSE from C (else "too close to call"); a failed gate
gives no rate, no probability and no call (``not-converged``).
"""

from __future__ import annotations

from qualbayes.errors import InputError

NOT_CONVERGED = "not-converged"
TOO_CLOSE = "too close to call"
LIMIT_CALLS = {"accept": "within limit", "reject": "above limit", "undecided": "undecided"}
LATEST_CALLS = {"accept": "worse", "reject": "better", "undecided": "no clear change"}
ONE_PERIOD = "one period only"
#: P(worst) over the suppliers sums to 1 in every draw; allowance for rounding
WORST_SUM_TOLERANCE = 1e-4
NUMBERS = ("rate_median", "rate_upper", "prob_above", "prob_above_mcse", "prob_worst",
           "prob_worst_mcse", "prob_latest_worse", "prob_latest_worse_mcse")


def _altered(path, where: str, message: str) -> InputError:
    return InputError(f"run record key {where!r}: {message}. The record was altered",
                      file=str(path))


def check_supplier_calls(path, record: dict) -> None:
    """Refuse (InputError, exit 2) a record whose calls do not follow from its numbers."""
    c = record["question"]["confidence"]
    period = record["question"]["period"]
    passed = bool(record["diagnostics"]["passed"])
    suppliers = record["suppliers"]
    for i, s in enumerate(suppliers):
        where = f"suppliers[{i}] ({s['supplier']!r})"
        if not passed:
            _no_verdict(path, where, s)
            continue
        above = _need(path, where, s, "prob_above")
        _expect(path, where, "limit_call", s["limit_call"], 1.0 - above,
                _need(path, where, s, "prob_above_mcse"), c, LIMIT_CALLS, above)
        _need(path, where, s, "prob_worst")
        _need(path, where, s, "prob_worst_mcse")
        if period is None:
            if s["latest_call"] is not None:
                raise _altered(path, where, f"has the latest-period call "
                               f"{s['latest_call']!r} although no periods were asked for")
        elif s["periods"] < 2:
            if s["latest_call"] != ONE_PERIOD:
                raise _altered(path, where, f"says {s['latest_call']!r} for a supplier with "
                               f"one period; the call is {ONE_PERIOD!r}")
        else:
            _expect(path, where, "latest_call", s["latest_call"],
                    _need(path, where, s, "prob_latest_worse"),
                    _need(path, where, s, "prob_latest_worse_mcse"), c, LATEST_CALLS)
    if passed and suppliers:
        total = sum(s["prob_worst"] for s in suppliers)
        if abs(total - 1.0) > WORST_SUM_TOLERANCE:
            raise _altered(path, "suppliers", f"P(worst) sums to {total:.6f} over the "
                           "suppliers; exactly one supplier is the worst in every draw, so "
                           "the sum is 1")
        medians = [s["rate_median"] for s in suppliers]
        if any(b > a for a, b in zip(medians, medians[1:], strict=False)):
            raise _altered(path, "suppliers", "is not ranked by median rate, highest first")
    for i, p in enumerate(record["periods"]):
        if not passed and any(p.get(k) is not None for k in ("rate_median", "prob_above")):
            raise _altered(path, f"periods[{i}]", "gives a rate although the convergence "
                           "gate failed")


def _no_verdict(path, where: str, s: dict) -> None:
    for key in ("limit_call", "latest_call"):
        if s[key] not in (NOT_CONVERGED, None):
            raise _altered(path, where, f"says {s[key]!r} although its convergence gate "
                           "failed; a failed gate gives no verdict")
    if s["limit_call"] != NOT_CONVERGED:
        raise _altered(path, where, "lacks 'not-converged' although the gate failed")
    given = [k for k in NUMBERS if s.get(k) is not None]
    if given:
        raise _altered(path, where, f"gives {given[0]} although the convergence gate failed")


def _need(path, where: str, s: dict, key: str) -> float:
    value = s.get(key)
    if value is None:
        raise _altered(path, f"{where}.{key}", "is missing although the gate passed")
    if key.endswith("_mcse") and value < 0:
        raise _altered(path, f"{where}.{key}", f"is a negative Monte Carlo error {value}")
    return float(value)


def _expect(path, where: str, key: str, label, p: float, mcse: float, c: float,
            words: dict, recorded: float | None = None) -> None:
    """``p`` is the probability that supports the "accept" word of ``words``; ``recorded``
    the probability as the record holds it (``p`` when not given)."""
    from qualbayes.inference.mcse import decide_within_error  # noqa: PLC0415

    word = decide_within_error(p, mcse, c)
    if word == "too-close":
        if isinstance(label, str) and label.startswith(TOO_CLOSE):
            return
        expected = TOO_CLOSE
    else:
        expected = words[word]
        if label == expected:
            return
    shown = p if recorded is None else recorded
    raise _altered(path, f"{where}.{key}", f"says {label!r} but its recorded probability "
                   f"{shown:.6g} (Monte Carlo error {mcse:.3g}) at confidence {c} gives "
                   f"{expected!r}")
