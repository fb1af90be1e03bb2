"""The shape of a run record, checked key by key when a record is read back.

A spec is a type name, a dict of key -> spec (keys ending in ``?`` may be missing), or a
one-item list ``[spec]`` for a list of such items. Type names: ``str``, ``int``, ``num``
(int or float), ``prob`` (a number in [0, 1]), ``conf`` (in (0, 1)), ``pos`` (> 0),
``count`` (an int >= 0), ``bool``, ``dict``, ``list``, ``any``; a trailing ``|none``
allows null. Only what the renderers rely on is listed; other keys pass unchecked.
"""

from __future__ import annotations

from qualbayes.errors import InputError

COMMON = {"kind": "str", "caution": "str", "command?": "str", "versions?": "dict",
          "notes?": ["str"], "standards?": ["str"], "schema_version?": "int",
          "created_utc?": "str", "report_id?": "str", "tool_version?": "str"}

GATE = {"passed": "bool", "max_rhat?": "num|none", "min_ess_bulk?": "num|none",
        "min_ess_tail?": "num|none", "divergences?": "int|none", "reasons?": ["str"],
        "parameters?": "list"}

SCHEMAS = {
    "lots": {
        **COMMON,
        "question": {"spec": "conf", "confidence": "conf", "asked": "str", "interval": "str",
                     "upper_bound": "str"},
        "input": {"file": "str", "sheet?": "str|none", "sha256": "str", "header_row": "int",
                  "rows_read": "count", "columns": "dict", "notes": ["str"]},
        "model": "str", "prior": "str", "seed?": "int|none", "diagnostics": "dict",
        "next_lot": "dict", "decision_counts": "dict",
        "lots": [{"lot": "str", "part?": "str|none", "row": "int", "inspected": "count",
                  "defectives": "count", "lot_size?": "count|none",
                  "posterior_mean": "prob|none", "interval": ["prob|none"],
                  "upper_bound": "prob|none", "prob_within_spec": "prob|none",
                  "prob_within_spec_draws?": "count|none", "decision": "str"}],
    },
    "life": {
        **COMMON,
        "question": {"mission": "pos", "target": "conf", "confidence": "conf", "units": "str",
                     "asked": "str", "interval": "str", "lower_bound": "str"},
        "input": {"file": "str", "sheet?": "str|none", "sha256": "str", "header_row": "int",
                  "rows_read": "count", "columns": "dict", "notes": ["str"]},
        "model": "str", "prior": ["str"], "decision_counts": "dict",
        "groups": [{"group": "str", "units": "count", "failures": "count",
                    "suspensions": "count", "prob_meets_target": "prob|none",
                    "decision": "str", "diagnostics": GATE, "notes": ["str"]}],
    },
    "plan": {
        **COMMON,
        "summary": ["str"], "assumptions": ["str"], "notes": ["str"],
        "tables": [{"title": "str", "columns": ["str"], "rows": [["any"]]}],
    },
    "at-use": {
        **COMMON,
        "question": {"mission": "pos", "target": "conf", "confidence": "conf", "units": "str",
                     "use": "str", "distribution": "str", "asked": "str", "interval": "str",
                     "lower_bound": "str"},
        "input": {"file": "str", "sheet?": "str|none", "sha256": "str", "header_row": "int",
                  "rows_read": "count", "columns": "dict", "notes": ["str"]},
        "stresses": [{"column": "str", "relation": "str", "temperature_unit": "str|none",
                      "use": "pos", "use_as_written": "str"}],
        "model": "str", "prior": ["str"], "seed": "int",
        "result": {"units": "count", "failures": "count", "diagnostics": GATE,
                   "decision": "str", "prob_meets_target": "prob|none",
                   "prob_meets_target_mc_error": "num|none", "notes": ["str"],
                   "levels?": [{"stress": ["num"], "units": "count", "failures": "count",
                                "acceleration_factor": "dict"}],
                   "coefficients?": [{"name": "str", "stress": "str", "median": "num",
                                      "interval": ["num"]}],
                   "curve?": "dict"},
        "points?": "dict",
    },
    "suppliers": {
        **COMMON,
        "question": {"spec": "conf", "confidence": "conf", "period": "str|none",
                     "rate_unit?": "str", "asked": "str", "rate": "str", "interval": "str",
                     "upper_bound": "str"},
        "input": {"file": "str", "sheet?": "str|none", "sha256": "str", "header_row": "int",
                  "rows_read": "count", "columns": "dict", "notes": ["str"],
                  "sources?": [{"file": "str", "sha256": "str"}],
                  "rows_skipped?": [{"row": "int", "reason": "str"}],
                  "columns_not_used?": ["any"]},
        "model": "str", "prior": "dict", "seed": "int", "hyper_medians": "dict",
        "diagnostics": {**GATE, "parameters": [{"name": "str", "rhat": "num|none",
                                                "ess_bulk": "num|none", "ess_tail": "num|none",
                                                "passed": "bool"}],
                        "attempts": "count", "divergences": "count"},
        "notes": ["str"],
        "suppliers": [{"rank": "int", "supplier": "str", "lots": "count", "inspected": "count",
                       "defectives": "count", "periods": "count",
                       "latest_period": "str|none", "rate_median": "prob|none",
                       "rate_upper": "prob|none", "prob_above": "prob|none",
                       "prob_above_mcse": "num|none", "prob_worst": "prob|none",
                       "prob_worst_mcse": "num|none", "prob_latest_worse": "prob|none",
                       "prob_latest_worse_mcse": "num|none", "limit_call": "str",
                       "latest_call": "str|none"}],
        "periods": [{"supplier": "str", "period": "str", "lots": "count", "inspected": "count",
                     "defectives": "count", "rate_median": "prob|none",
                     "interval_low": "prob|none", "interval_high": "prob|none",
                     "rate_upper": "prob|none", "prob_above": "prob|none",
                     "prob_above_mcse": "num|none"}],
    },
    "returns": {
        **COMMON,
        "question": {"horizon": "int", "period": "str", "usage": "pos", "confidence": "conf",
                     "spares": "count|none", "asked": "str", "interval": "str"},
        "input": {"fleet": "str", "fleet_sha256": "str", "life": "str", "life_sha256": "str",
                  "units_in_service": "num", "rows_read": "count", "notes": ["str"]},
        "life": {"file": "str", "source": "str", "diagnostics": GATE, "summary": "dict",
                 "notes": ["str"]},
        "model": "str", "forecast": "dict|none",
    },
}


def _fail(path, key: str, message: str) -> InputError:
    return InputError(f"run record key {key!r}: {message}", file=str(path))


def _shown(value) -> str:
    text = repr(value)
    return text if len(text) <= 40 else text[:37] + "..."


def _check_type(path, key: str, name: str, value) -> None:
    kinds = name.split("|")
    if value is None:
        if "none" in kinds:
            return
        raise _fail(path, key, f"is null; expected {kinds[0]}")
    base = kinds[0]
    number = isinstance(value, int | float) and not isinstance(value, bool)
    ok = {"str": isinstance(value, str), "bool": isinstance(value, bool),
          "dict": isinstance(value, dict), "list": isinstance(value, list), "any": True,
          "int": isinstance(value, int) and not isinstance(value, bool),
          "count": isinstance(value, int) and not isinstance(value, bool) and value >= 0,
          "num": number, "prob": number and 0.0 <= value <= 1.0,
          "conf": number and 0.0 < value < 1.0, "pos": number and value > 0}[base]
    if not ok:
        words = {"prob": "a number in [0, 1]", "conf": "a number strictly between 0 and 1",
                 "pos": "a positive number", "count": "a whole number >= 0",
                 "num": "a number", "int": "a whole number"}.get(base, base)
        raise _fail(path, key, f"expected {words}, found {_shown(value)}")


def _check(path, key: str, spec, value) -> None:
    if isinstance(spec, str):
        _check_type(path, key, spec, value)
    elif isinstance(spec, list):
        if not isinstance(value, list):
            raise _fail(path, key, f"expected a list, found {_shown(value)}")
        for i, item in enumerate(value):
            _check(path, f"{key}[{i}]", spec[0], item)
    else:
        if not isinstance(value, dict):
            raise _fail(path, key, f"expected an object, found {_shown(value)}")
        for name, sub in spec.items():
            optional = name.endswith("?")
            name = name.rstrip("?")
            where = f"{key}.{name}" if key else name
            if name not in value:
                if optional:
                    continue
                raise _fail(path, where, "is missing")
            _check(path, where, sub, value[name])


def check_schema(path, record: dict) -> None:
    """Refuse (InputError, exit 2) the first key whose value is missing or malformed."""
    _check(path, "", SCHEMAS[record["kind"]], record)
    if record["kind"] == "suppliers":
        _check_suppliers(path, record)
    if record["kind"] == "lots":
        for part, gate in record["diagnostics"].items():
            _check(path, f"diagnostics.{part}", GATE, gate)
        for i, lot in enumerate(record["lots"]):
            if lot["defectives"] > lot["inspected"]:
                raise _fail(path, f"lots[{i}].defectives", "exceeds the units inspected")


RATE_UNITS = ("%", "ppm")


def _check_suppliers(path, record: dict) -> None:
    """What the scorecard's renderers rely on beyond types: a known rate unit, counts that
    add up, ranks 1..S, each supplier once, every period row naming a listed supplier."""
    unit = record["question"].get("rate_unit", "%")
    if unit not in RATE_UNITS:
        raise _fail(path, "question.rate_unit", f"expected one of {', '.join(RATE_UNITS)}, "
                    f"found {_shown(unit)}")
    names = []
    for key in ("suppliers", "periods"):
        for i, row in enumerate(record[key]):
            if row["defectives"] > row["inspected"]:
                raise _fail(path, f"{key}[{i}].defectives", "exceeds the units inspected")
            if key == "periods" and row["inspected"] == 0:
                raise _fail(path, f"{key}[{i}].inspected", "is 0; a period with lots has "
                            "units inspected")
            if key == "suppliers":
                names.append(row["supplier"])
    if len(set(names)) != len(names):
        raise _fail(path, "suppliers", "names a supplier more than once")
    ranks = [row["rank"] for row in record["suppliers"]]
    if ranks != list(range(1, len(ranks) + 1)):
        raise _fail(path, "suppliers", f"ranks {_shown(ranks)} are not 1, 2, ... in order")
    known = set(names)
    for i, row in enumerate(record["periods"]):
        if row["supplier"] not in known:
            raise _fail(path, f"periods[{i}].supplier", f"{_shown(row['supplier'])} is not "
                        "among the suppliers")
    for name, total in _totals(record["periods"]).items():
        row = record["suppliers"][names.index(name)]
        if (row["lots"], row["inspected"], row["defectives"]) != total:
            raise _fail(path, f"suppliers[{names.index(name)}]", f"the counts of "
                        f"{_shown(name)} differ from the sum of its periods")


def _totals(periods: list[dict]) -> dict:
    out: dict = {}
    for p in periods:
        lots, n, x = out.get(p["supplier"], (0, 0, 0))
        out[p["supplier"]] = (lots + p["lots"], n + p["inspected"], x + p["defectives"])
    return out
