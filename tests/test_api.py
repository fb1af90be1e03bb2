"""The Python API: DataFrames in, result objects out, checked on entry.

Outside references (copied with their sources into docs/references.md):
* conjugacy, p | x ~ Beta(a + x, b + n - x) (Hamada et al., Bayesian Reliability, 2008,
  ch. 2), with scipy.stats.beta as the reference library;
* the success-run size n = ceil(ln(1 - C) / ln R) = 22 for R = C = 0.90 (Kececioglu,
  Reliability and Life Testing Handbook; common practice);
* the chi-square test-time factor T / MTBF = chi2(C; 2r + 2) / 2 = 2.303 for r = 0 at 90%
  (NIST/SEMATECH e-Handbook 8.3.1.2), with scipy.stats.chi2;
* the binomial OC of a single sampling plan, scipy.stats.binom.
"""

from __future__ import annotations

import dataclasses
import math

import numpy as np
import pandas as pd
import pytest
from scipy import stats

import qualbayes as qb
from qualbayes.caution import CAUTION
from qualbayes.errors import InputError, ParameterError

LOTS = pd.DataFrame({
    "lot": ["L1", "L2", "L3", "L4"],
    "part": ["P-7", "P-7", "P-9", None],
    "lot_size": [5000, 2000, None, 800],
    "inspected": [300, 50, 125, 80],
    "defectives": [0, 3, 1, 0],
})


def test_a_frame_and_the_same_table_in_a_file_give_the_same_answer(tmp_path):
    path = tmp_path / "lots.csv"
    LOTS.to_csv(path, index=False)
    from_frame = qb.assess_lots(LOTS, spec="1%", confidence=0.9).to_frame()
    from_file = qb.assess_lots(path, spec="1%", confidence=0.9).to_frame()
    pd.testing.assert_frame_equal(from_frame, from_file)


def test_columns_are_named_through_a_mapping():
    renamed = LOTS.rename(columns={"lot": "Batch code", "inspected": "Qty checked",
                                   "defectives": "NG"})
    mapping = {"lot": "Batch code", "inspected": "Qty checked", "defectives": "NG"}
    got = qb.assess_lots(renamed, spec=0.01, columns=mapping).to_frame()
    want = qb.assess_lots(LOTS, spec=0.01).to_frame()
    pd.testing.assert_frame_equal(got, want)


@pytest.mark.parametrize("change, column", [
    ({"defectives": [0, 60, 1, 0]}, "defectives"),        # more defectives than inspected
    ({"lot": ["L1", "L1", "L3", "L4"]}, "lot"),            # a lot twice
    ({"inspected": [300, -5, 125, 80]}, "inspected"),      # negative count
    ({"defectives": [0, 2.5, 1, 0]}, "defectives"),        # not a whole number
    ({"inspected": [300, 0, 125, 80]}, "inspected"),       # nothing inspected
])
def test_a_frame_is_refused_exactly_as_the_same_file(tmp_path, change, column):
    bad = LOTS.assign(**change)
    path = tmp_path / "bad.csv"
    bad.to_csv(path, index=False)
    with pytest.raises(InputError) as from_frame:
        qb.assess_lots(bad, spec=0.01)
    with pytest.raises(InputError) as from_file:
        qb.assess_lots(path, spec=0.01)
    assert from_frame.value.row == from_file.value.row == 3  # header is row 1
    assert from_frame.value.column == from_file.value.column == column
    # a csv cell is text ('-5'), a frame cell a number (-5), as in an xlsx: same words
    assert from_frame.value.message.replace("'", "") == from_file.value.message.replace("'", "")


def test_the_conjugate_answer_is_the_beta_posterior_of_scipy():
    # decision_basis="process": the question is about the rate p (with lot sizes given the
    # default is the lot's own fraction defective, checked in tests/test_lot_decisions.py)
    res = qb.assess_lots(LOTS, spec=0.01, confidence=0.9, prior="jeffreys",
                         decision_basis="process").to_frame()
    post = stats.beta(0.5 + LOTS["defectives"], 0.5 + LOTS["inspected"] - LOTS["defectives"])
    np.testing.assert_allclose(res["prob_within_spec"], post.cdf(0.01), rtol=1e-12)
    np.testing.assert_allclose(res["upper_bound"], post.ppf(0.9), rtol=1e-10)
    np.testing.assert_allclose(res["posterior_mean"], post.mean(), rtol=1e-12)
    as_object = qb.assess_lots(LOTS, spec=0.01, confidence=0.9,
                               prior=qb_priors().Beta(0.5, 0.5),
                               decision_basis="process").to_frame()
    np.testing.assert_allclose(as_object["prob_within_spec"], res["prob_within_spec"])


def qb_priors():
    import qualbayes.priors as priors

    return priors


def test_a_limit_may_be_written_as_the_engineer_writes_it():
    frames = [qb.assess_lots(LOTS, spec=s).to_frame() for s in (0.01, "1%", "10000ppm")]
    for f in frames[1:]:
        pd.testing.assert_frame_equal(f, frames[0])


@pytest.mark.parametrize("kwargs, parameter", [
    ({"spec": 1.5}, "spec"), ({"spec": "1.5"}, "spec"), ({"spec": "one percent"}, "spec"),
    ({"spec": True}, "spec"), ({"spec": float("nan")}, "spec"), ({"spec": 0}, "spec"),
    ({"spec": 0.01, "confidence": 0.3}, "confidence"),
    ({"spec": 0.01, "confidence": 1.0}, "confidence"),
    ({"spec": 0.01, "prior": "bogus"}, "prior"), ({"spec": 0.01, "prior": 3}, "prior"),
    ({"spec": 0.01, "prior": "history", "seed": -1}, "seed"),
    ({"spec": 0.01, "columns": 5}, "columns"),
    ({"spec": 0.01, "sheet": "Sheet1"}, "sheet"),
])
def test_bad_arguments_are_refused_on_entry_naming_the_parameter(kwargs, parameter):
    with pytest.raises(ParameterError) as err:
        qb.assess_lots(LOTS, **kwargs)
    assert err.value.parameter == parameter
    assert isinstance(err.value, ValueError)
    assert "--" not in str(err.value)  # a parameter, never a flag


def test_a_result_is_frozen_and_has_every_view():
    res = qb.assess_lots(LOTS.assign(lot=["<b>L1</b>", "L2", "L3", "L4"]), spec=0.01)
    with pytest.raises(dataclasses.FrozenInstanceError):
        res.spec = 0.5
    assert CAUTION in res.summary()
    assert "&lt;b&gt;L1&lt;/b&gt;" in res._repr_html_() and "<b>L1</b>" not in res._repr_html_()
    record = res.to_record()
    assert record["kind"] == "lots" and len(record["lots"]) == 4
    assert record["input"]["file"] == "DataFrame" and len(record["input"]["sha256"]) == 64
    assert res.idata is None  # a closed form has no draws


def test_attribute_and_mtbf_plans_match_the_handbook_values():
    plan = qb.plan_attribute(reliability=0.9, confidence=0.9, failures=[0, 1])
    table = plan.to_frame()
    assert table.loc[table["allowed failures c"] == 0, "units n"].item() == 22
    n1 = table.loc[table["allowed failures c"] == 1, "units n"].item()
    # binomial definition: the smallest n with P(X <= 1 | R = 0.9) <= 0.1
    assert stats.binom.cdf(1, n1, 0.1) <= 0.1 < stats.binom.cdf(1, n1 - 1, 0.1)
    mtbf = qb.plan_mtbf(goal=1000, confidence=0.9).to_frame()
    assert mtbf["classical test time"].item() == pytest.approx(
        1000 * stats.chi2.ppf(0.9, 2) / 2, rel=1e-12)
    assert mtbf["T / MTBF goal (chi-square)"].item() == pytest.approx(2.303, abs=5e-4)


def test_a_sampling_plan_meets_both_risks_by_the_binomial():
    plan = qb.plan_sampling(aql="1%", alpha=0.05, ltpd="5%", beta=0.1)
    row = plan.to_frame().iloc[0]
    n, c = int(row["sample size n"]), int(row["acceptance number c"])
    assert stats.binom.cdf(c, n, 0.01) >= 0.95
    assert stats.binom.cdf(c, n, 0.05) <= 0.10
    oc = plan.curve("oc")
    assert set(oc.columns) == {"x", "series", "y"}
    assert "OC points" in plan.table_names


@pytest.mark.parametrize("call, parameter", [
    (lambda: qb.plan_attribute(reliability=1.2, confidence=0.9), "reliability"),
    (lambda: qb.plan_attribute(reliability=0.9, confidence=0.9, failures=-1), "failures"),
    (lambda: qb.plan_mtbf(goal=-5, confidence=0.9), "goal"),
    (lambda: qb.plan_life(reliability=0.9, confidence=0.9, mission=100, units=0, shape=2),
     "units"),
    (lambda: qb.plan_life(reliability=0.9, confidence=0.9, mission=100, units=5, shape=(3, 1)),
     "high"),
    (lambda: qb.plan_sampling(aql=0.05, alpha=0.05, ltpd=0.01, beta=0.1), "ltpd"),
    (lambda: qb.plan_attribute(reliability=0.9, confidence=0.9, prior="history"), "prior"),
    (lambda: qb.plan_attribute(reliability=0.9, confidence=0.9, prior="R>0.95@90%",
                               history=LOTS), "history"),
    (lambda: qb.plan_mtbf(goal=100, confidence=0.9, prior="p<1%@90%"), "prior"),
])
def test_plan_arguments_are_checked_on_entry(call, parameter):
    with pytest.raises(ParameterError) as err:
        call()
    assert err.value.parameter == parameter


def test_life_arguments_are_checked_before_any_fit():
    frame = pd.DataFrame({"unit": ["a", "b"], "time": [100.0, 200.0], "status": ["S", "S"]})
    with pytest.raises(ParameterError) as err:
        qb.assess_life(frame, mission=50, target=0.9)
    assert err.value.parameter == "shape"  # zero failures: the shape must be stated
    with pytest.raises(ParameterError) as err:
        qb.assess_life(frame, mission=-1, target=0.9)
    assert err.value.parameter == "mission"
    with pytest.raises(InputError) as err:
        qb.assess_life(frame.assign(status=["S", "maybe"]), mission=50, target=0.9,
                       shape=(1.5, 3))
    assert err.value.row == 3 and err.value.column == "status"


def test_a_life_plan_with_a_shape_range_lies_between_its_ends():
    plan = qb.plan_life(reliability=0.9, confidence=0.9, mission=1000, units=10,
                        shape=(1.5, 3)).table("Plans")
    t = plan["time per unit"].item()
    low, high = plan.iloc[0, -2], plan.iloc[0, -1]
    assert min(low, high) < t < max(low, high) or math.isclose(t, min(low, high))


def test_pandas_types_read_as_their_values():
    frame = pd.DataFrame({
        "lot": [101, 102, 103],  # numbers as lot ids
        "date": pd.to_datetime(["2026-03-01", None, "2026-03-09"]),  # Timestamp and NaT
        "lot_size": pd.array([5000, None, 800], dtype="Int64"),  # pandas NA
        "part": pd.Categorical(["A-1", "A-1", "B-2"]),
        "inspected": np.array([125, 80, 50], dtype=np.int32),
        "defectives": np.array([0.0, 1.0, 0.0]),  # whole numbers held as floats
    })
    got = qb.assess_lots(frame, spec=0.02).to_frame()
    assert got["lot"].tolist() == ["101", "102", "103"]
    assert str(got["date"][0]) == "2026-03-01" and got["date"][1] is None
    assert got["lot_size"].isna().tolist() == [False, True, False]
    assert got["part"].tolist() == ["A-1", "A-1", "B-2"]
    assert got["defectives"].tolist() == [0, 1, 0]


def test_a_history_fit_from_python_equals_the_command(tmp_path, capsys):
    """The API samples exactly as ``qualbayes lots --prior history`` does (same sampler
    settings, same default seed): every lot's probability is the same number."""
    import json

    from qualbayes.cli import main

    frame = pd.DataFrame({"lot": [f"L{i}" for i in range(6)], "part": ["P-7"] * 6,
                          "inspected": [80, 80, 125, 80, 50, 80],
                          "defectives": [0, 1, 0, 2, 0, 0]})
    path = tmp_path / "lots.csv"
    frame.to_csv(path, index=False)
    capsys.readouterr()
    assert main(["lots", str(path), "--spec", "2%", "--prior", "history", "--json"]) == 0
    record = json.loads(capsys.readouterr().out)
    result = qb.assess_lots(frame, spec="2%", prior="history")
    from_cli = [lot["prob_within_spec"] for lot in record["lots"]]
    assert result.to_frame()["prob_within_spec"].tolist() == from_cli


def test_parts_fitted_apart_keep_their_own_divergence_flags_in_idata():
    """Several parts are sampled as independent problems: ``idata.sample_stats.diverging``
    has a ``part`` dimension holding each part's own flags (not one part's for all)."""
    frame = pd.DataFrame({"lot": [f"L{i}" for i in range(8)],
                          "part": ["A"] * 4 + ["B"] * 4,
                          "inspected": [80] * 8, "defectives": [0, 1, 0, 0, 2, 0, 1, 3]})
    result = qb.assess_lots(frame, spec="2%", prior="history")
    idata = result.idata
    flags = idata.sample_stats["diverging"]
    assert flags.dims == ("chain", "draw", "part")
    assert list(idata.posterior["part"].values) == ["A", "B"]
    # the last fit: a close call continues the chains, so later fits hold more draws
    fit = [f for f in result.fits if getattr(f, "diverging_parts", None) is not None][-1]
    np.testing.assert_array_equal(flags.values, fit.diverging_parts)
    # one part alone: its own draws, its own flags and only its lots
    one = result.idata_of("B")
    assert list(one.posterior["part"].values) == ["B"]
    np.testing.assert_array_equal(one.posterior["mu"].values[..., 0],
                                  idata.posterior["mu"].sel(part="B").values)
    assert one.observed_data["defectives"].values.tolist() == [2, 0, 1, 3]
    with pytest.raises(KeyError, match="no part"):
        result.idata_of("C")


@pytest.mark.parametrize("bad", [-1, 2**32, 2**63 + 5, 1.5, 2.0**60, "7", True])
def test_a_seed_outside_the_command_lines_range_is_refused_on_entry(bad):
    """Seeds are whole numbers from 0 to 2**32 - 1, as ``--seed``: a larger one would end the
    fit with jax's OverflowError (from 2**63) or be read through a float as another number
    (above 2**53), and a string or a bool is no seed. Refused before any data is read."""
    with pytest.raises(ParameterError) as err:
        qb.assess_lots(LOTS, spec="2%", prior="history", seed=bad)
    assert err.value.parameter == "seed"


def test_a_seed_is_taken_exactly():
    from qualbayes.parameters import seed

    assert seed(2**32 - 1) == 4294967295 and seed(np.int64(12)) == 12 and seed(5.0) == 5
    assert type(seed(np.uint32(3))) is int
