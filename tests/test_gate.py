"""The convergence gate: numpy diagnostics against ArviZ, selection by coordinate, constant
draws, and the gate judging the model's parameters.

Reference: ArviZ (az.rhat method="rank", az.ess methods "bulk" and "tail"), which implements
Vehtari, Gelman, Simpson, Carpenter & Buerkner (2021), Bayesian Analysis 16:667 (see
docs/references.md); agreement to 1e-8 is asked (the same arithmetic, in another order).
"""

from __future__ import annotations

import warnings

import numpy as np
import pytest

from qualbayes.inference import diagnostics
from qualbayes.inference.gate import diagnose, diagnose_arrays, diagnose_idata


def _draws(shape, seed):
    rng = np.random.default_rng(seed)
    x = rng.normal(size=shape)
    x[..., 0] = np.cumsum(x[..., 0], axis=1) * 0.1  # strongly autocorrelated
    x[0, :, -1] += 0.4  # one chain off: R-hat well above 1
    x[..., 1] = np.round(x[..., 1])  # ties: average ranks
    return x


@pytest.mark.parametrize("shape", [(4, 1000, 3), (4, 101, 3), (2, 40, 2), (1, 200, 2)])
def test_rhat_and_ess_match_arviz(shape):
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", FutureWarning)
        import arviz as az
    x = _draws(shape, sum(shape))
    ours = diagnostics.summary(x)
    for k in range(shape[2]):
        xs = x[:, :, k]
        assert ours["ess_bulk"][k] == pytest.approx(float(az.ess(xs, method="bulk")), abs=1e-8)
        assert ours["ess_tail"][k] == pytest.approx(float(az.ess(xs, method="tail")), abs=1e-8)
        if shape[0] > 1:
            assert ours["rhat"][k] == pytest.approx(float(az.rhat(xs, method="rank")),
                                                    abs=1e-8)


def test_a_part_named_1_does_not_take_the_diagnostics_of_a_part_named_x1():
    # the earlier gate picked parameters by the end of their label: "mu[X[1]" ends with
    # "[1]", so one stuck part made part "1" not-converged
    rng = np.random.default_rng(0)
    good = {"mu[1]": rng.normal(size=(4, 500)), "log_kappa[1]": rng.normal(size=(4, 500))}
    stuck = {"mu[X[1]": np.full((4, 500), 0.3), "log_kappa[X[1]": rng.normal(size=(4, 500))}
    gate = diagnose(good | stuck, 0)
    assert gate.select("1").passed
    assert [p.name for p in gate.select("1").params] == ["mu[1]", "log_kappa[1]"]
    assert not gate.select("X[1").passed
    by_coord = diagnose_arrays({"mu": np.stack([good["mu[1]"], stuck["mu[X[1]"]], -1)}, 0,
                               dims={"mu": ["part"]}, coords={"part": ["1", "X[1"]})
    assert by_coord.select(part="1").passed and not by_coord.select(part="X[1").passed


def test_a_part_with_its_own_sampler_keeps_its_own_divergences():
    # every part its own sampler: 3 divergences of part "X[1" fail "X[1" only, by coordinate
    # or by tag, and a part named "1" is not matched by the end of "X[1"
    rng = np.random.default_rng(2)
    mu = rng.normal(size=(4, 500, 2))
    gate = diagnose_arrays({"mu": mu}, 3, dims={"mu": ["part"]}, coords={"part": ["1", "X[1"]})
    gate.local_divergences = {"part": {"1": 0, "X[1": 3}}
    assert not gate.passed and gate.divergences == 3
    for chosen in (gate.select(part="1"), gate.select("1")):
        assert chosen.passed and chosen.divergences == 0
    for chosen in (gate.select(part="X[1"), gate.select("X[1")):
        assert not chosen.passed and chosen.divergences == 3
        assert chosen.reasons() == ["3 divergent transitions (allowed 0)"]
    # a joint sampler (no local counts): divergences belong to every part
    gate.local_divergences = {}
    assert not gate.select(part="1").passed


def test_constant_draws_are_reported_as_constant():
    gate = diagnose_arrays({"mu": np.ones((4, 300, 2))}, 0, dims={"mu": ["part"]},
                           coords={"part": ["a", "b"]})
    assert not gate.passed
    assert all(p.constant for p in gate.params)
    assert all("it is constant" in r for r in gate.reasons())
    assert gate.to_dict()["parameters"][0]["constant"] is True


def test_the_gate_reads_an_inference_data_by_coordinate():
    from qualbayes.inference.run import to_idata

    rng = np.random.default_rng(2)
    mu = rng.normal(size=(4, 400, 2))
    diverging = np.zeros((4, 400), bool)
    diverging[1, 7] = True
    idata = to_idata({"mu": mu}, diverging, {"mu": ["part"]}, {"part": ["1", "X[1"]})
    gate = diagnose_idata(idata)
    assert gate.divergences == 1 and not gate.passed
    assert [p.coords for p in gate.params] == [{"part": "1"}, {"part": "X[1"}]
    direct = diagnostics.rhat(mu)
    assert [p.rhat for p in gate.params] == pytest.approx(list(direct), abs=1e-12)


def test_the_life_gate_judges_log_shape_and_log_scale_only():
    from qualbayes.models.life import GATE_VARS, gate_dims

    kw = gate_dims(["A", "1"])
    assert kw["gate_vars"] == GATE_VARS == ["log_shape", "log_scale"]
    assert kw["coords"] == {"group": ["A", "1"]}


def test_selection_by_index_equals_a_scan_of_every_parameter():
    # select() looks parameters up in an index built once (1,000 parts are selected one by
    # one); it must pick exactly what a scan of every parameter's coordinates picks, in
    # order, for tags, coordinates and both, including labels that end like others
    rng = np.random.default_rng(4)
    names = ["1", "X[1", "11", "A", "a b", "2"]
    draws = rng.normal(size=(4, 100, len(names), 2))
    gate = diagnose_arrays({"mu": draws[..., 0], "log_kappa": draws[..., 1]}, 0,
                           dims={"mu": ["part"], "log_kappa": ["part"]},
                           coords={"part": names})

    def scan(tag=None, **coords):
        chosen = gate.params
        if tag is not None:
            chosen = [p for p in chosen if str(tag) in (str(v) for v in p.coords.values())]
        return [p.name for p in chosen
                if all(str(p.coords.get(k)) == str(v) for k, v in coords.items())]

    for name in [*names, "X", "[1", "nothing"]:
        assert [p.name for p in gate.select(name).params] == scan(name)
        assert [p.name for p in gate.select(part=name).params] == scan(part=name)
        assert [p.name for p in gate.select(name, part=name).params] == scan(name, part=name)
    assert [p.name for p in gate.select().params] == [p.name for p in gate.params]
    # a parameter list changed after a selection is indexed again
    gate.params = gate.params[:2]
    assert [p.name for p in gate.select(part="1").params] == ["mu[1]"]
