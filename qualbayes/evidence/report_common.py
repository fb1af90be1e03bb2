"""Sections every report shares: inputs, sampler and diagnostics, cautions, reproduction,
sign-off; and the run metadata every record and report carries."""

from __future__ import annotations

import datetime as dt

from qualbayes.evidence.document import Paragraph, Section, Table
from qualbayes.inference.gate import DIVERGENCES_MAX, ESS_MIN, RHAT_MAX


def inputs_section(record: dict) -> Section:
    i = record["input"]
    rows = [["file", i["file"]], ["sheet", i.get("sheet")], ["SHA-256 (full)", i["sha256"]],
            ["header row", i.get("header_row")], ["rows read", i.get("rows_read")],
            ["rows rejected", i.get("rows_rejected", 0)]]
    rows += [[f"column for {label(k)}", v] for k, v in (i.get("columns") or {}).items()]
    blocks = [Table(["item", "value"], rows, id="inputs", style="kv")]
    if i.get("rows_rejected"):
        blocks.append(Paragraph("Rows rejected: " + "; ".join(i.get("rejected_reasons", []))))
    else:
        blocks.append(Paragraph("No row was rejected: the tool stops at the first faulty row "
                                "and names it, so a report exists only for a clean file."))
    for note in i.get("notes") or []:
        blocks.append(Paragraph(f"Note: {note}"))
    return Section("Inputs", blocks)


def diagnostics_section(record: dict) -> Section:
    diags = record.get("diagnostics") or {}
    if not diags:
        return Section("Sampler and diagnostics", [Paragraph(
            "Closed form: no sampler was used, so there is no convergence to check. The "
            "numbers are exact up to floating-point rounding.")])
    first = next(iter(diags.values()))
    settings = first.get("settings", {})
    blocks = [Table(["setting", "value"],
                    [[label(k), str(v) if k == "seed" else v] for k, v in settings.items()],
                    caption="Sampler settings of the final attempt.", id="sampler",
                    style="kv"),
              Paragraph(f"Gate: rank-normalised R-hat <= {RHAT_MAX}, bulk and tail ESS >= "
                        f"{ESS_MIN:.0f}, divergent transitions <= {DIVERGENCES_MAX} "
                        "(Vehtari et al. 2021). One automatic retry with twice the draws and "
                        "target acceptance 0.95 follows a failure.")]
    rows = []
    for group, d in diags.items():
        for p in d["parameters"]:
            rows.append([group, p["name"], p["rhat"], p["ess_bulk"], p["ess_tail"],
                         d["divergences"], d["attempts"], "pass" if p["passed"] and
                         d["divergences"] <= DIVERGENCES_MAX else "FAIL"])
    blocks.append(Table(["group", "parameter", "R-hat", "bulk ESS", "tail ESS", "divergences",
                         "attempts", "gate"], rows, id="diagnostics"))
    return Section("Sampler and diagnostics", blocks)


def caution_section(record: dict) -> Section:
    blocks = [Paragraph(record["caution"], "caution"),
              Paragraph("Standards to defer to (named, not reproduced): "
                        + "; ".join(record["standards"]) + ".")]
    blocks += [Paragraph(n) for n in record.get("notes") or []]
    return Section("Caution", blocks)


def reproduce_sections(record: dict) -> list[Section]:
    versions = Section("Package versions", [Table(
        ["package", "version"], [[k, v] for k, v in record["versions"].items()])])
    command = Section("Reproduce this run", [
        Paragraph(record["command"], "mono"),
        Paragraph("Run this command on the same input file (same SHA-256) and seed to obtain "
                  "the same numbers. This command rebuilds this report from its run record:"),
        Paragraph("qualbayes report RUN.json --out NEW_FOLDER", "mono")])
    return [versions, command]


META_KEYS = ("created_utc", "report_id", "tool_version", "analyst")


def run_metadata(record: dict, analyst: str | None = None) -> dict:
    """UTC time, report id, tool version and analyst of a run: the record's own fields when
    it has them, otherwise made now (a new id, the current time and version)."""
    from qualbayes import __version__  # noqa: PLC0415
    from qualbayes.evidence.run_record import new_report_id  # noqa: PLC0415

    now = dt.datetime.now(dt.UTC).replace(microsecond=0)
    made = {"created_utc": now.isoformat().replace("+00:00", "Z"),
            "report_id": new_report_id(now),
            "tool_version": __version__, "analyst": analyst}
    return {k: record[k] if record.get(k) else made[k] for k in META_KEYS}


def signoff_section(record: dict) -> Section:
    """A block to sign on paper: prepared by (the analyst when given), reviewed by, dates."""
    analyst = run_metadata(record).get("analyst") or ""
    rows = [["prepared by", analyst, "", ""], ["reviewed and approved by", "", "", ""]]
    return Section("Sign-off", [
        Paragraph("To be completed by hand. " + record["caution"]),
        Table(["role", "name", "signature", "date"], rows, id="sign-off", style="signoff")])


def label(key: str) -> str:
    """A record key in words: ``draws_per_chain`` -> ``draws per chain``."""
    return LABELS.get(key, key.replace("_", " "))


LABELS = {"aql": "acceptable quality level (AQL)", "ltpd": "lot tolerance percent defective "
          "(LTPD)", "alpha": "producer's risk (alpha)", "beta": "consumer's risk (beta)",
          "lot_size": "lot size N", "units_inspected": "units inspected",
          "mtbf_goal": "MTBF goal", "mission_time": "mission time", "target_accept":
          "target acceptance probability", "max_tree_depth": "largest tree depth",
          "chain_method": "how chains run", "draws_per_chain": "draws per chain"}
