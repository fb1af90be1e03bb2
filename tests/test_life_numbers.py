"""The life question returns numbers; the evidence layer words them (issue 13).

* A LifeResult's assessment and group results hold numbers, flags and codes: no sentence,
  no plot curve (walked key by key); the run record built from them carries the notes and
  curves the command line has always shown.
* ``LifeResult.idata`` when groups hold different numbers of draws (a close call sampled
  again with more draws): a DrawCountError naming every group's draws and pointing to
  ``idata_of``; ``idata_of(group)`` gives each group's own draws. With equal draws
  ``idata`` is one InferenceData whose values are the draws the answer used.

Real NUTS fits, kept small (2 chains); the checks are exact equalities of arrays and
structure, so no Monte Carlo tolerance is involved.
"""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest

import qualbayes
from qualbayes.inference.run import SamplerSettings
from qualbayes.results import DrawCountError

SMALL = dict(num_chains=2, num_warmup=500, num_samples=600)
WORDED_KEYS = {"notes", "plot", "curve", "words", "verdict", "band", "rule", "why", "basis"}


def frame() -> pd.DataFrame:
    """Two invented rig groups: A with few failures, B much longer-lived."""
    rows = [("A", t, "F") for t in (410.0, 650.0, 890.0, 1200.0)]
    rows += [("A", 1500.0, "S")] * 8
    rows += [("B", t, "F") for t in (2900.0, 4100.0)]
    rows += [("B", 5000.0, "S")] * 10
    return pd.DataFrame({"unit": [f"u{i}" for i in range(len(rows))],
                         "group": [r[0] for r in rows], "time": [r[1] for r in rows],
                         "status": [r[2] for r in rows]})


def prose(text: str) -> bool:
    """A sentence rather than a name or a code: more than three words."""
    return len(text.split()) > 3


def walk(node, path: str = "") -> list[str]:
    """Every worded key, sentence or curve-like array below ``node`` (the gate's own
    ``diagnostics`` are left out: they are the sampler plumbing's record, not this
    question's words)."""
    found = []
    if isinstance(node, dict):
        for k, v in node.items():
            if k == "diagnostics":
                continue
            if k in WORDED_KEYS:
                found.append(f"{path}.{k}")
            found += walk(v, f"{path}.{k}")
    elif isinstance(node, list | tuple):
        if len(node) > 50:
            found.append(f"{path}: a list of {len(node)} values")
        for i, v in enumerate(node):
            found += walk(v, f"{path}[{i}]")
    elif isinstance(node, np.ndarray) and node.size > 50:
        found.append(f"{path}: an array of {node.size} values")
    elif isinstance(node, str) and prose(node):
        found.append(f"{path}: {node!r}")
    return found


@pytest.fixture(scope="module")
def rich():
    """Mission beyond the data (extrapolation, data-alone answer), the check of fit and the
    other distributions: every extra that used to carry words."""
    return qualbayes.assess_life(frame(), mission=6000.0, target=0.5, confidence=0.9,
                                 seed=5, settings=SamplerSettings(**SMALL), check_fit=True,
                                 compare_models=True)


def test_group_results_hold_numbers_and_codes_only(rich):
    a = rich.assessment
    assert walk(list(rich.groups)) == []
    assert walk(a.groups) == [] and walk(a.comparisons) == []
    assert {c["call"] for c in a.comparisons} <= {"accept", "reject", "undecided",
                                                   "too-close", "not-converged"}
    assert isinstance(a.model, str) and not prose(a.model)
    # the extras are there, as numbers
    g = a.groups[0]
    assert g["extrapolation"]["beyond"] and g["fit_check"] and g["models"]["by_model"]
    assert isinstance(g["data_alone"], bool)


def test_the_record_words_the_numbers_and_draws_the_curves(rich):
    record = rich.to_record()
    for g, raw in zip(record["groups"], rich.groups, strict=True):
        assert g["prob_meets_target"] == raw["prob_meets_target"]
        assert g["notes"] and all(isinstance(n, str) for n in g["notes"])
        assert len(g["plot"]["curve"]["time"]) == 60
        # the extrapolation note carries the spread across the distributions
        assert any("times the longest observed time" in n for n in g["notes"])
        assert g["monte_carlo"]["rule"].startswith("P or 1 - P within")
        assert "words" in g["models"] and all("words" in c for c in g["fit_check"])
        assert "shape_prior_share" not in g and "data_alone" not in g
    assert record["comparisons"][0]["verdict"] and record["comparisons"][0]["words"]
    assert record["model"].startswith("t ~ Weibull(shape beta, scale eta)")
    assert any("other distributions: lognormal prior" in n for n in record["notes"])
    text = rich.summary()
    assert "[A]" in text and "times the longest observed time" in text


# ------------------------------------------------------------------ idata and draw counts

def _close_target(first, group: str, mission: float, confidence: float) -> float:
    """The target at which P(R(mission) >= target) equals C on ``group``'s draws: a close
    call by construction (P within 3 MCSE of C), so the group is sampled again."""
    d = first.assessment.draws[group]
    r = np.exp(-(mission / d["scale"]) ** d["shape"])
    return float(np.quantile(r, 1.0 - confidence))


@pytest.fixture(scope="module")
def equal_and_refitted():
    settings = SamplerSettings(**SMALL, seed=11)
    first = qualbayes.assess_life(frame(), mission=300.0, target=0.5, confidence=0.9,
                                  settings=settings)
    target = _close_target(first, "A", 300.0, 0.9)
    again = qualbayes.assess_life(frame(), mission=300.0, target=target, confidence=0.9,
                                  settings=settings)
    return first, again


def test_idata_with_equal_draws_is_one_inference_data(equal_and_refitted):
    first, _ = equal_and_refitted
    assert first.converged
    mc = {g["group"]: g["monte_carlo"]["extra_draw_rounds"] for g in first.groups}
    assert mc == {"A": 0, "B": 0}  # far from the call: no extra draws
    idata = first.idata
    post = idata.posterior
    assert list(post["log_shape"].dims) == ["chain", "draw", "group"]
    assert list(post.coords["group"].values) == ["A", "B"]
    for g in ("A", "B"):
        own = first.assessment.draws[g]["chains"]["log_shape"]
        assert np.array_equal(post["log_shape"].sel(group=g).values, own)
    assert idata.sample_stats["diverging"].shape == (2, 600)
    assert idata.observed_data["lower"].size == len(frame())


def test_idata_with_different_draw_counts_names_them_and_idata_of_works(equal_and_refitted):
    _, again = equal_and_refitted
    rounds = {g["group"]: g["monte_carlo"]["extra_draw_rounds"] for g in again.groups}
    assert rounds["A"] >= 1 and rounds["B"] == 0, rounds
    per_chain = {g["group"]: g["monte_carlo"]["draws_per_chain"] for g in again.groups}
    with pytest.raises(DrawCountError) as err:
        _ = again.idata
    msg = str(err.value)
    assert isinstance(err.value, ValueError)
    assert f"A: 2 chains x {per_chain['A']:,} draws" in msg
    assert f"B: 2 chains x {per_chain['B']:,} draws" in msg
    assert "idata_of(" in msg
    for g in ("A", "B"):
        one = again.idata_of(g)
        own = again.assessment.draws[g]["chains"]["log_shape"]
        assert np.array_equal(one.posterior["log_shape"].sel(group=g).values, own)
        assert one.sample_stats["diverging"].shape == (2, per_chain[g])
        assert one.observed_data["lower"].size == int((frame()["group"] == g).sum())
    with pytest.raises(KeyError, match="no group 'C'"):
        again.idata_of("C")
