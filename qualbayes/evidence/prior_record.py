"""Renderings of a run record's prior keys (``prior_words``, ``prior_elicited``,
``earlier_data``, ``prior_predictive``, ``sensitivity``; see :mod:`qualbayes.priors`):
terminal lines, workbook sheets and report sections, shared by lots, life and plan records.
Everything is drawn from the record, so a saved record rebuilds the same evidence."""

from __future__ import annotations

from qualbayes.evidence.numbers import probability
from qualbayes.evidence.terminal import table as text_table

CODES = {"accept": "A", "reject": "R", "undecided": "U", "not-converged": "NC",
         "meets": "M", "does-not-meet": "DNM", "demonstrated": "D",
         "not demonstrated": "ND", "protected": "P", "not protected": "NP",
         "not usable": "-"}


def has_prior_evidence(record: dict) -> bool:
    return bool(record.get("prior_elicited") or record.get("earlier_data")
                or record.get("sensitivity"))


def _cell(res: dict) -> str:
    code = CODES.get(res["decision"], res["decision"])
    prob = res.get("prob")
    return code if prob is None else f"{probability(prob)} {code}"


def legend(sens: dict) -> list[str]:
    return [f"[{k + 1}] {p['label']}: {p['prior']}" for k, p in enumerate(sens["priors"])]


def prior_lines(record: dict) -> list[str]:
    """The prior in words (stated, borrowed, expected data) for the terminal."""
    from qualbayes.evidence.explain import prior_range_advice  # noqa: PLC0415

    lines = [f"prior in words: {w}" for w in record.get("prior_words") or []]
    return lines + (prior_range_advice(record.get("prior_predictive")) if lines else [])


def sensitivity_lines(record: dict) -> list[str]:
    sens = record.get("sensitivity")
    if not sens:
        return []
    codes = ", ".join(f"{v} {k}" for k, v in CODES.items())
    lines = ["", f"Prior sensitivity: {sens['question']} under each prior of the set:",
             *[f"  {line}" for line in legend(sens)]]
    headers = [sens["noun"]] + [f"[{k + 1}]" for k in range(len(sens["priors"]))]
    rows = [[item["name"]] + [_cell(r) for r in item["results"]] for item in sens["items"]]
    lines += ["", text_table(headers, rows, "l" + "r" * len(sens["priors"])),
              f"(probability and decision: {codes})"]
    lines += [f"{item['name']}: {item['summary']}" for item in sens["items"] if item["depends"]]
    lines.append(sens["summary"])
    expects = [(p["label"], (p.get("predictive") or {}).get("words")) for p in sens["priors"]]
    lines += ["what each prior expects (prior predictive):"]
    lines += [f"  [{k + 1}] {label}: {words}" for k, (label, words) in enumerate(expects)
              if words]
    return lines


def prior_sheets(record: dict) -> dict:
    """'Prior' (words, statements and fitted quantiles, earlier data) and, with a
    sensitivity section, 'Prior sensitivity' (long form) and 'Priors compared'."""
    if not has_prior_evidence(record):
        return {}
    rows: list[list] = [["the prior in words", w] for w in record.get("prior_words") or []]
    for e in record.get("prior_elicited") or []:
        rows.append(["elicited prior", e["prior"]])
        rows += [["statement", s["text"], s["words"]] for s in e["statements"]]
        rows.append(["check", "probability", "stated value", "fitted quantile",
                     "P(X <= stated value) under the prior"])
        rows += [["", f["prob"], f["stated"], f["fitted"], f["achieved"]] for f in e["fitted"]]
        if e.get("assumption"):
            rows.append(["assumption", e["assumption"]])
    ed = record.get("earlier_data")
    if ed:
        rows += [[f"earlier data: {k}", v if not isinstance(v, dict | list) else str(v)]
                 for k, v in ed.items()]
    sheets: dict = {"Prior": rows}
    sens = record.get("sensitivity")
    if sens:
        import pandas as pd  # noqa: PLC0415

        label = {p["key"]: p["label"] for p in sens["priors"]}
        prior = {p["key"]: p["prior"] for p in sens["priors"]}
        sheets["Prior sensitivity"] = pd.DataFrame([
            {sens["noun"]: item["name"], "prior": label[r["prior"]], "prior in symbols":
             prior[r["prior"]], "probability": r.get("prob"), "decision": r["decision"],
             "note": r.get("reason", ""), "summary for this " + sens["noun"]: item["summary"]}
            for item in sens["items"] for r in item["results"]])
        compared = [["question", sens["question"]], ["summary", sens["summary"]],
                    ["prior", "in symbols", "why it is in the set", "what it expects"]]
        compared += [[p["label"], p["prior"], p["why"],
                      (p.get("predictive") or {}).get("words")] for p in sens["priors"]]
        sheets["Priors compared"] = compared
    return sheets


def prior_sections(record: dict) -> list:
    """Report sections: 'The prior in words' (with the prior figure) and 'Prior
    sensitivity'."""
    from qualbayes.evidence.document import Figure, Paragraph, Section, Table  # noqa: PLC0415

    if not has_prior_evidence(record):
        return []
    from qualbayes.evidence.prior_plots import prior_figure  # noqa: PLC0415 - matplotlib

    blocks: list = [Paragraph(w) for w in record.get("prior_words") or []]
    for e in record.get("prior_elicited") or []:
        blocks.append(Table(["probability", "stated value", "fitted quantile",
                             "P(X <= stated) under the prior"],
                            [[f["prob"], f["stated"], f["fitted"], f["achieved"]]
                             for f in e["fitted"]],
                            caption=f"{e['prior']}: the statements against the fitted prior.",
                            id="prior-check"))
    fig = prior_figure(record)
    if fig is not None:
        blocks.append(Figure("The prior", fig, "Density of the prior; dashed lines: the stated "
                             "values, with the probability stated below each.", "fig-prior"))
    sections = [Section("The prior in words", blocks)]
    sens = record.get("sensitivity")
    if sens:
        headers = [sens["noun"]] + [p["label"] for p in sens["priors"]] + ["summary"]
        rows = [[item["name"]] + [_cell(r) for r in item["results"]] + [item["summary"]]
                for item in sens["items"]]
        sections.append(Section("Prior sensitivity", [
            Paragraph(f"The question {sens['question']} asked again under each prior of a "
                      "fixed set. " + sens["summary"]),
            Table(["prior", "in symbols", "why it is in the set", "what it expects"],
                  [[p["label"], p["prior"], p["why"], (p.get("predictive") or {}).get("words")]
                   for p in sens["priors"]], id="priors-compared"),
            Table(headers, rows, caption="Probability and decision under each prior ("
                  + ", ".join(f"{v}: {k}" for k, v in CODES.items()) + ").",
                  id="prior-sensitivity")]))
    return sections
