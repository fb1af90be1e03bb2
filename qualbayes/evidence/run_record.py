"""The run record (run.json): its stamp, its digest, and reading one back without trusting it.

Every record written carries ``schema_version``, ``created_utc``, ``report_id`` and
``tool_version``, and a ``digest``: the SHA-256 of its canonical JSON (keys sorted, no
spaces), and one per top-level key and per item of a list of results, so that a hand edit is
detected *and named* ("key 'lots' item 3 (lot 'B-17')"). The digest detects edits; it is not
a signature (anyone able to run this code can recompute it).

Reading a record (:func:`read_record`) refuses, with exit 2 and the key at fault: anything
but a regular file (a FIFO, a device), a file over :data:`MAX_RECORD_BYTES`, JSON nested
deeper than :data:`MAX_DEPTH`, numbers longer than 40 characters, NaN/Infinity, a missing key,
a wrong type or a value out of range, a digest that does not match, and a decision that does
not follow from its recorded probability, confidence and convergence gate. A record written
before digests existed (no ``schema_version``) is accepted as *unverified*.
"""

from __future__ import annotations

import datetime as dt
import hashlib
import json
import os
import re
import stat
import uuid

from qualbayes.errors import InputError

SCHEMA_VERSION = 1
MAX_RECORD_BYTES = 64 * 2**20
MAX_DEPTH = 40
MAX_NUMBER_CHARS = 40
STAMP_KEYS = ("schema_version", "created_utc", "report_id", "tool_version")
#: Keys whose list items get their own digest (the results people act on).
ITEM_KEYS = ("lots", "groups", "tables", "suppliers", "periods")
ACCEPTING = {"accept", "meets"}
REJECTING = {"reject", "does-not-meet"}
NO_VERDICT = "not-converged"


# ----------------------------------------------------------------------------- writing

def new_report_id(now: dt.datetime) -> str:
    """``QB-YYYYMMDD-`` and ten hexadecimal digits (random)."""
    return f"QB-{now:%Y%m%d}-{uuid.uuid4().hex[:10].upper()}"


def stamp(record: dict, analyst: str | None = None) -> dict:
    """Add the schema version, UTC time, report id, tool version and analyst (kept if
    present)."""
    from qualbayes import __version__  # noqa: PLC0415

    now = dt.datetime.now(dt.UTC)
    defaults = {"schema_version": SCHEMA_VERSION,
                "created_utc": now.isoformat(timespec="seconds").replace("+00:00", "Z"),
                "report_id": new_report_id(now),
                "tool_version": __version__, "analyst": analyst}
    for key, value in defaults.items():
        record.setdefault(key, value)
    return record


def canonical(value) -> bytes:
    return json.dumps(value, sort_keys=True, separators=(",", ":"), ensure_ascii=False,
                      allow_nan=False).encode("utf-8")


def _sha(value) -> str:
    return hashlib.sha256(canonical(value)).hexdigest()


def _digest_of(body: dict) -> dict:
    """Each key's and each result item's SHA-256, and the whole body's: every value is
    written in canonical JSON once and streamed into its own hash and the body's (the same
    bytes as :func:`canonical` of the whole, without holding them all at once)."""
    hashes: dict[str, str] = {}
    items: dict[str, dict[str, str]] = {}
    whole = hashlib.sha256(b"{")
    for n, key in enumerate(sorted(body)):
        whole.update((b"," if n else b"") + canonical(key) + b":")
        value = body[key]
        if key in ITEM_KEYS and isinstance(value, list):
            listed = hashlib.sha256(b"[")
            whole.update(b"[")
            items[key] = {}
            for i, item in enumerate(value):
                text = canonical(item)
                if i:
                    listed.update(b",")
                    whole.update(b",")
                listed.update(text)
                whole.update(text)
                items[key][f"{key}[{i}]"] = hashlib.sha256(text).hexdigest()
            listed.update(b"]")
            whole.update(b"]")
            hashes[key] = listed.hexdigest()
        else:
            text = canonical(value)
            whole.update(text)
            hashes[key] = hashlib.sha256(text).hexdigest()
    whole.update(b"}")
    parts: dict[str, str] = {}
    for key in body:
        parts[key] = hashes[key]
        parts.update(items.get(key, {}))
    return {"algorithm": "sha256 of canonical JSON (sorted keys, no spaces)",
            "content": whole.hexdigest(), "keys": parts}


def seal(record: dict) -> dict:
    """A copy of the (JSON-plain) record with its digest; any earlier digest is replaced."""
    from qualbayes.evidence.jsonout import plain  # noqa: PLC0415

    body = plain({k: v for k, v in record.items() if k != "digest"})
    return {**body, "digest": _digest_of(body)}


# ----------------------------------------------------------------------------- reading

def _bad(path, message: str, key: str | None = None) -> InputError:
    where = f"key {key!r}: " if key else ""
    return InputError(f"run record {where}{message}", file=str(path))


def _read_bytes(path) -> bytes:
    try:
        fd = os.open(path, os.O_RDONLY | getattr(os, "O_NONBLOCK", 0))
    except FileNotFoundError:
        raise InputError("file not found", file=str(path)) from None
    except OSError as err:
        raise InputError(f"cannot read the file ({err.strerror or err})", file=str(path)
                         ) from None
    try:
        st = os.fstat(fd)
        if not stat.S_ISREG(st.st_mode):
            raise InputError("not a regular file (a device, FIFO, socket or folder); a run "
                             "record is a file", file=str(path))
        if st.st_size > MAX_RECORD_BYTES:
            raise InputError(f"the file is {st.st_size / 2**20:.0f} MiB; a run record is at "
                             f"most {MAX_RECORD_BYTES // 2**20} MiB", file=str(path))
        with os.fdopen(os.dup(fd), "rb") as fh:
            data = fh.read(st.st_size + 1)  # no larger buffer than the file
    finally:
        os.close(fd)
    if len(data) > min(st.st_size, MAX_RECORD_BYTES):
        raise InputError("the file changed while it was being read; read it again", file=str(path))
    return data


_STRINGS = re.compile(rb'"(?:[^"\\]|\\.)*"')


def _depth(data: bytes) -> int:
    import numpy as np  # noqa: PLC0415

    bare = np.frombuffer(_STRINGS.sub(b'""', data), dtype=np.uint8)
    step = np.zeros(bare.shape, dtype=np.int32)
    step[(bare == ord("[")) | (bare == ord("{"))] = 1
    step[(bare == ord("]")) | (bare == ord("}"))] = -1
    return int(np.cumsum(step).max()) if step.size else 0


def _number(kind):
    def parse(text: str):
        if len(text) > MAX_NUMBER_CHARS:
            raise ValueError(f"a number of {len(text):,} characters")
        return kind(text)
    return parse


def _constant(text: str):
    raise ValueError(f"{text} is not a JSON number")


def load(path) -> dict:
    """The record as JSON, checked for file kind, size, depth and number lengths."""
    data = _read_bytes(path)
    if _depth(data) > MAX_DEPTH:
        raise _bad(path, f"is nested more than {MAX_DEPTH} levels deep; not a run record")
    try:
        record = json.loads(data.decode("utf-8"), parse_int=_number(int),
                            parse_float=_number(float), parse_constant=_constant)
    except UnicodeDecodeError:
        raise _bad(path, "is not UTF-8 text") from None
    except ValueError as err:
        raise _bad(path, f"is not valid JSON ({str(err)[:160]})") from None
    if not isinstance(record, dict):
        raise _bad(path, "is not a JSON object")
    return record


def read_record(path, kinds) -> tuple[dict, bool]:
    """(record, verified): validated; ``verified`` False for a record without a digest."""
    record = load(path)
    kind = record.get("kind")
    if kind not in kinds:
        raise _bad(path, f"no known kind ({', '.join(sorted(kinds))}); not a qualbayes run "
                   "record", "kind")
    verified = verify(path, record)
    from qualbayes.evidence.record_schema import check_schema  # noqa: PLC0415

    check_schema(path, record)
    check_decisions(path, record)
    return record, verified


def verify(path, record: dict) -> bool:
    """True when the digest matches, False for an old record without one; else refuse,
    naming the keys that were changed."""
    digest = record.get("digest")
    if digest is None:
        if "schema_version" in record:
            raise _bad(path, "is missing although the record has a schema version: the "
                       "digest was removed, so edits cannot be ruled out", "digest")
        return False
    if not isinstance(digest, dict) or not isinstance(digest.get("keys"), dict) or not (
            isinstance(digest.get("content"), str)):
        raise _bad(path, "is not a digest written by qualbayes", "digest")
    body = {k: v for k, v in record.items() if k != "digest"}
    if _sha(body) == digest["content"]:
        return True
    now = _digest_of(body)["keys"]
    was = digest["keys"]
    changed = [k for k in now if k in was and now[k] != was[k] and "[" in k]
    changed_top = [k for k in now if "[" not in k and now[k] != was.get(k)]
    changed += [k for k in changed_top if not any(c.startswith(k + "[") for c in changed)]
    changed += [f"{k} (removed)" for k in was if "[" not in k and k not in now]
    names = [_describe(record, k) for k in changed] or ["(the record as a whole)"]
    raise InputError(f"run record was changed after the run (its digest does not match): "
                     f"{', '.join(names)}. Rebuild only from the record as written",
                     file=str(path))


def _describe(record: dict, key: str) -> str:
    m = re.fullmatch(r"(\w+)\[(\d+)\]", key)
    if not m:
        return f"key {key!r}"
    item = record.get(m[1], [])[int(m[2])] if int(m[2]) < len(record.get(m[1], [])) else {}
    label = None
    if isinstance(item, dict):
        label = item.get("lot") or item.get("group") or item.get("title")
        if label is None and item.get("supplier") is not None:
            label = " ".join(str(item[k]) for k in ("supplier", "period") if item.get(k))
    return f"key {m[1]!r} item {int(m[2]) + 1}" + (f" ({label!r})" if label else "")


def check_decisions(path, record: dict) -> None:
    """Every verdict must follow from its recorded probability, confidence and gate."""
    kind = record["kind"]
    if kind == "lots":
        c = record["question"]["confidence"]
        gates = record.get("diagnostics") or {}
        for i, lot in enumerate(record["lots"]):
            gate = gates.get(str(lot.get("part"))) if len(gates) > 1 else next(
                iter(gates.values()), None)
            passed = True if gate is None else bool(gate.get("passed"))
            _check_one(path, f"lots[{i}] (lot {lot['lot']!r})", lot["decision"],
                       lot["prob_within_spec"], c, passed)
    elif kind == "life":
        c = record["question"]["confidence"]
        for i, g in enumerate(record["groups"]):
            passed = bool((g.get("diagnostics") or {}).get("passed", True))
            _check_one(path, f"groups[{i}] (group {g['group']!r})", g["decision"],
                       g["prob_meets_target"], c, passed)
            _check_close_call(path, f"groups[{i}] (group {g['group']!r})", g["decision"],
                              g["prob_meets_target"], g.get("prob_meets_target_mcse"), c)
    elif kind == "at-use":
        _check_at_use(path, record)
    elif kind == "returns":
        _check_returns(path, record)
    elif kind == "suppliers":
        from qualbayes.evidence.supplier_checks import check_supplier_calls  # noqa: PLC0415

        check_supplier_calls(path, record)


AT_USE_VERDICTS = {"accept": "meets", "reject": "does-not-meet", "undecided": "undecided",
                   "too-close": "too-close-to-call"}


def _check_at_use(path, record: dict) -> None:
    """The verdict is recomputed from the recorded probability, its Monte Carlo error, the
    confidence and the gate (the rule of accelerated_analysis.decide_at_use)."""
    from qualbayes.inference.mcse import decide_within_error  # noqa: PLC0415

    r, c = record["result"], record["question"]["confidence"]
    passed = bool(r["diagnostics"]["passed"])
    _check_one(path, "result", r["decision"], r["prob_meets_target"], c, passed)
    if not passed:
        return
    p, err = r["prob_meets_target"], r["prob_meets_target_mc_error"]
    if p is None or err is None or err < 0:
        raise _bad(path, "lacks the probability or its Monte Carlo error behind the "
                   "decision. The record was altered", "result")
    expected = AT_USE_VERDICTS[decide_within_error(p, err, c)]
    if r["decision"] != expected:
        raise _bad(path, f"says {r['decision']!r} but its recorded probability {p} (Monte "
                   f"Carlo error {err}) at confidence {c} gives {expected!r}. The record was "
                   "altered", "result")


def _check_returns(path, record: dict) -> None:
    """A forecast exists exactly when the life posterior passed its gate; every recorded
    probability of enough spares is a probability."""
    passed = bool(record["life"]["diagnostics"]["passed"])
    fc = record["forecast"]
    if passed != (fc is not None):
        why = ("is present although the life posterior failed its convergence gate"
               if fc is not None else "is missing although the life posterior passed its gate")
        raise _bad(path, f"{why}. The record was altered", "forecast")
    if fc is None:
        return
    for g in [*fc.get("groups", []), fc.get("overall") or {}]:
        prob = (g.get("spares") or {}).get("prob_enough")
        if prob is not None and not (isinstance(prob, int | float) and 0 <= prob <= 1):
            raise _bad(path, f"P(enough spares) {prob!r} is not a probability. The record "
                       "was altered", f"forecast ({g.get('group')!r})")


def _check_one(path, where: str, decision: str, prob, confidence: float,
               passed: bool) -> None:
    if not passed and decision != NO_VERDICT:
        raise _bad(path, f"says {decision!r} although its convergence gate failed; a failed "
                   "gate gives no verdict. The record was altered", where)
    if decision in ACCEPTING and (prob is None or prob < confidence):
        raise _bad(path, f"says {decision!r} but its recorded probability {prob} is below the "
                   f"confidence {confidence}. The record was altered", where)
    if decision in REJECTING and (prob is None or 1.0 - prob < confidence):
        raise _bad(path, f"says {decision!r} but its recorded probability {prob} does not "
                   f"reach 1 - confidence ({1 - confidence:g}). The record was altered", where)


def _check_close_call(path, where: str, decision: str, prob, mcse, confidence: float) -> None:
    """The Monte Carlo rule (records that carry an MCSE): a verdict needs P (or 1 - P) more
    than 3 MCSE from C; a P within 3 MCSE of C with ``undecided`` is consistent (too close
    to call at this Monte Carlo precision). Records without an MCSE are not checked here."""
    from qualbayes.inference.mcse import is_close_call  # noqa: PLC0415

    if prob is None or not isinstance(mcse, int | float) or isinstance(mcse, bool):
        return
    if mcse < 0:
        raise _bad(path, f"records a negative Monte Carlo error {mcse}. The record was "
                   "altered", where)
    if (decision in ACCEPTING | REJECTING) and is_close_call(prob, mcse, confidence):
        raise _bad(path, f"says {decision!r} but its recorded probability {prob} lies within 3 "
                   f"Monte Carlo errors ({mcse}) of the confidence {confidence}: that call is "
                   "'undecided', too close to call. The record was altered", where)
