"""The supplier scorecard, the at-use question and the returns forecast through the public
API (``qualbayes.assess_suppliers``, ``assess_at_use``, ``forecast_returns``): the numbers
equal the command line's for the same data and seed (the same sampler settings, so the
same draws: exact equality, no tolerance), the results have their tidy frame, terminal
text, HTML view, run record and InferenceData, and bad parameters are refused by name.

The data are the repository's invented examples (docs/references.md lists no external
values here: the statistics of these questions are checked in test_suppliers.py,
test_accelerated.py and test_forecast.py; this file checks the API around them).
"""

from __future__ import annotations

import json
from pathlib import Path

import numpy as np
import pandas as pd
import pytest
from helpers import write_csv
from test_accelerated import motor_csv

import qualbayes
from qualbayes.caution import CAUTION
from qualbayes.cli import main
from qualbayes.errors import ParameterError

EXAMPLES = Path(__file__).resolve().parent.parent / "example_lots"


def cli_record(argv: list[str], capsys) -> dict:
    capsys.readouterr()
    assert main([*argv, "--json"]) == 0
    return json.loads(capsys.readouterr().out)


def fleet_csv(path: Path) -> Path:
    rng = np.random.default_rng(1)
    return write_csv(path, ["Serial", "Hours", "Region"],
                     [[f"U{i}", round(float(rng.uniform(0, 5000)), 1), ["N", "S"][i % 2]]
                      for i in range(400)])


# ------------------------------------------------------------------ refused on entry

@pytest.mark.parametrize(("call", "name"), [
    (lambda: qualbayes.assess_suppliers(EXAMPLES / "supplier_lots.csv", spec=1.5), "spec"),
    (lambda: qualbayes.assess_suppliers(EXAMPLES / "supplier_lots.csv", spec="2%",
                                        period="year"), "period"),
    (lambda: qualbayes.assess_at_use("x.csv", stress_column="T", relation="eyring",
                                     use="40C", mission=1, target=0.9), "relation"),
    (lambda: qualbayes.assess_at_use("x.csv", stress_column="T", relation="arrhenius",
                                     use="40", mission=1, target=0.9), "use"),
    (lambda: qualbayes.assess_at_use("x.csv", stress_column="T", relation="arrhenius",
                                     use="40C", mission=-1, target=0.9), "mission"),
    (lambda: qualbayes.forecast_returns("f.csv", life="l.csv", usage=250, horizon=0),
     "horizon"),
    (lambda: qualbayes.forecast_returns("f.csv", life="l.csv", usage=250, shape=(4, 1)),
     "shape"),
])
def test_bad_parameters_are_refused_by_name(call, name):
    with pytest.raises(ParameterError) as err:
        call()
    assert str(err.value).startswith(f"{name}=")
    assert "--" not in str(err.value)  # never a flag name in the library


# ------------------------------------------------------------------ suppliers

@pytest.fixture(scope="module")
def supplier_file(tmp_path_factory) -> Path:
    """The first 120 lots of the example export (a smaller fit for CI)."""
    lines = (EXAMPLES / "supplier_lots.csv").read_text().splitlines()[:121]
    path = tmp_path_factory.mktemp("suppliers") / "lots.csv"
    path.write_text("\n".join(lines) + "\n")
    return path


@pytest.fixture(scope="module")
def suppliers(supplier_file):
    frame = pd.read_csv(supplier_file, dtype=str, keep_default_na=False)
    return qualbayes.assess_suppliers(frame, spec="2%", confidence=0.95)


def test_suppliers_equal_the_command_line(suppliers, supplier_file, capsys):
    record = cli_record(["suppliers", str(supplier_file), "--spec", "2%"], capsys)
    ours = suppliers.to_record()
    assert suppliers.converged and record["diagnostics"]["passed"]
    assert ours["suppliers"] == record["suppliers"]
    frame = suppliers.to_frame()
    assert list(frame["supplier"]) == [r["supplier"] for r in record["suppliers"]]
    assert frame["rate_median"].tolist() == [r["rate_median"] for r in record["suppliers"]]
    text = suppliers.summary()
    assert CAUTION in text and frame["supplier"].iloc[0] in text
    assert "<table" in suppliers._repr_html_()


def test_suppliers_idata(suppliers):
    idata = suppliers.idata
    names = list(suppliers.to_frame()["supplier"])
    supplier_dims = [v for v in idata.posterior.data_vars
                     if "supplier" in idata.posterior[v].dims]
    assert supplier_dims, list(idata.posterior.data_vars)
    assert set(idata.posterior.coords["supplier"].values) == set(names)
    d = idata.sample_stats["diverging"]
    assert d.dims == ("chain", "draw") and d.shape == idata.posterior.theta.shape[:2]
    assert idata.observed_data["defectives"].sum() == suppliers.to_frame()["defectives"].sum()


# ------------------------------------------------------------------ at use

@pytest.fixture(scope="module")
def motor(tmp_path_factory):
    return motor_csv(tmp_path_factory.mktemp("motor") / "motor.csv")


@pytest.fixture(scope="module")
def at_use(motor):
    return qualbayes.assess_at_use(pd.read_csv(motor), stress_column="Temp (C)",
                                   relation="arrhenius", use="130C", mission=10000,
                                   target=0.9, distribution="lognormal")


def test_at_use_equals_the_command_line(at_use, motor, capsys):
    record = cli_record(["at-use", str(motor), "--stress-column", "Temp (C)", "--relation",
                         "arrhenius", "--use", "130C", "--mission", "10000", "--target",
                         "0.9", "--distribution", "lognormal"], capsys)
    ours = at_use.to_record()["result"]
    theirs = record["result"]
    for key in ("decision", "prob_meets_target", "prob_meets_target_mc_error",
                "reliability_at_mission", "b10_at_use", "coefficients", "levels"):
        assert ours[key] == theirs[key], key
    row = at_use.to_frame().iloc[0]
    assert row["prob_meets_target"] == theirs["prob_meets_target"]
    assert row["decision"] == at_use.decision == theirs["decision"]
    assert CAUTION in at_use.summary() and "<table" in at_use._repr_html_()


def test_at_use_idata(at_use):
    idata = at_use.idata
    theta = idata.posterior["theta"]
    assert theta.dims == ("chain", "draw", "coefficient")
    assert list(theta.coords["coefficient"].values) == ["log_sigma", "gamma0",
                                                         "scaled[Temp (C)]"]
    assert np.array_equal(theta.values, at_use.assessment.theta)
    assert idata.sample_stats["diverging"].shape == theta.shape[:2]
    assert idata.observed_data["lower"].size == at_use.to_frame()["units"].iloc[0]


# ------------------------------------------------------------------ returns

@pytest.fixture(scope="module")
def fleet(tmp_path_factory):
    return fleet_csv(tmp_path_factory.mktemp("fleet") / "fleet.csv")


@pytest.fixture(scope="module")
def returns(fleet):
    life = pd.read_csv(EXAMPLES / "sv30_rig_test.csv", dtype=str, keep_default_na=False)
    return qualbayes.forecast_returns(pd.read_csv(fleet), life=life, life_group="Rev C",
                                      usage=250, horizon=6, spares=20)


def test_returns_equal_the_command_line(returns, fleet, capsys):
    record = cli_record(["returns", str(fleet), "--life", str(EXAMPLES / "sv30_rig_test.csv"),
                         "--life-group", "Rev C", "--usage", "250", "--horizon", "6",
                         "--spares", "20"], capsys)
    ours = returns.to_record()
    assert ours["forecast"] == record["forecast"]
    assert ours["life"]["summary"] == record["life"]["summary"]
    assert ours["life"]["prior"] == record["life"]["prior"]
    frame = returns.to_frame()
    overall = frame[frame["group"] == record["forecast"]["overall"]["group"]]
    assert overall["median"].tolist() == [p["median"] for p in
                                          record["forecast"]["overall"]["periods"]]
    assert set(frame["group"]) == {record["forecast"]["overall"]["group"], "N", "S"}
    assert CAUTION in returns.summary() and "<table" in returns._repr_html_()


def test_returns_idata(returns):
    idata = returns.idata
    post = idata.posterior["log_shape"]
    assert post.dims == ("chain", "draw", "group")
    assert list(idata.posterior.coords["group"].values) == ["Rev C"]
    assert idata.sample_stats["diverging"].shape == post.shape[:2]
    assert idata.observed_data["lower"].size == returns.life["summary"]["units"]
