"""The quadrature engine of the lots question (``engine="quadrature"``): against
scipy.integrate.dblquad, against the NUTS engine within Monte Carlo error, deterministic, the
same split over processes (Dask), and its options checked. External values: docs/references.md
("Quadrature engine of the lots question")."""

import numpy as np
import pandas as pd
import pytest
from scipy import integrate, special, stats

from qualbayes import lot_grid_answers as qa
from qualbayes import lot_grid_vector as qv
from qualbayes.data.frames import lots_table
from qualbayes.errors import OptionError, ParameterError
from qualbayes.lot_question import assess_lots
from qualbayes.models import lot_history_grid as grid
from qualbayes.models.lot_spread import HistoryPrior, kappa_of, spread_floor


def _frame(parts=3, lots=12, seed=5, sizes=(400, 2000)):
    rng = np.random.default_rng(seed)
    k = parts * lots
    n = rng.choice([50, 80, 125], k)
    return pd.DataFrame({"lot": [f"L{i}" for i in range(k)],
                         "part": np.repeat([f"Q{j}" for j in range(parts)], lots),
                         "inspected": n, "defectives": rng.binomial(n, rng.beta(2, 150, k)),
                         "lot_size": rng.choice(list(sizes), k)})


def test_term_loglik_equals_the_log_beta_form():
    rng = np.random.default_rng(0)
    a, b = rng.uniform(1e-3, 50, 500), rng.uniform(0.1, 1e7, 500)
    xs, ns, ws = [0, 1, 3, 60, 2], [50, 50, 80, 315, 400], [3, 1, 2, 1, 1]
    ref = sum(w * (special.betaln(a + x, b + n - x) - special.betaln(a, b))
              for x, n, w in zip(xs, ns, ws, strict=True))
    assert np.allclose(grid.term_loglik(a, b, xs, ns, ws), ref, rtol=1e-12, atol=1e-5)


def test_many_groups_at_once_equal_one_at_a_time_whatever_the_chunk():
    rng = np.random.default_rng(1)
    terms = []
    for lots in (1, 3, 20, 60):
        n = rng.choice([50, 80, 125], lots)
        terms.append(grid.group_terms(rng.binomial(n, 0.01), n))
    one = grid.posterior_grids(terms, chunk=1)
    many = grid.posterior_grids(terms, chunk=3)
    # the coarse rows kept across calls (as the blocks of a batch keep them)
    coarse: dict = {}
    kept = [g for t in (terms[2:], terms[:2]) for g in grid.posterior_grids(t, coarse=coarse)]
    kept = kept[2:] + kept[:2]
    assert len(coarse) == len({k for xs, ns, _ in terms for k in zip(xs, ns, strict=True)})
    full = grid.COARSE_KEPT  # a full keep: the other rows evaluated per chunk, the same grids
    grid.COARSE_KEPT, small = 2, {}
    try:
        capped = grid.posterior_grids(terms, coarse=small)
    finally:
        grid.COARSE_KEPT = full
    assert len(small) == 2
    for g1, g2, g3, g4, (xs, ns, ws) in zip(one, many, kept, capped, terms, strict=True):
        assert np.array_equal(g1.weight, g2.weight) and np.array_equal(g1.mu, g2.mu)
        assert np.array_equal(g1.weight, g3.weight) and np.array_equal(g1.mu, g3.mu)
        assert np.array_equal(g1.weight, g4.weight) and np.array_equal(g1.mu, g4.mu)
        # the same posterior as the one-group grid written with log-beta functions
        ref = grid.posterior_grid(xs, ns, ws)
        assert np.allclose(grid.prob_within(g1, xs, ns, 0.01),
                           grid.prob_within(ref, xs, ns, 0.01), atol=1e-8)


def _dblquad_prob(x, n, spec, prior=None):
    """P(p_lot <= spec | lots) for the lot (x[0], n[0]) by scipy.integrate.dblquad over the
    same (u, v) box, the posterior normalised by the same integral (independent of the grid
    code: the density written out again here with scipy.stats.betabinom)."""
    prior = prior or HistoryPrior()

    def logpost(v, u):
        mu = special.expit(u)
        tau = spread_floor(mu) + np.exp(v)
        kap = kappa_of(mu, tau)
        a, b = mu * kap, (1 - mu) * kap
        return (np.log(mu) + np.log1p(-mu) + prior.log_tau_density(tau, mu) + v
                + stats.betabinom.logpmf(x, n, a, b).sum()), a, b
    g = grid.posterior_grid(x, n, size=200)
    u = special.logit(g.mu)
    tau = 1 / np.sqrt(g.kappa * g.mu * (1 - g.mu))
    v = np.log(tau - spread_floor(g.mu))
    lo_u, hi_u, lo_v, hi_v = u.min() - 1, u.max() + 1, v.min() - 1, v.max() + 1
    peak = max(logpost(vv, uu)[0] for uu, vv in zip(u[::50], v[::50], strict=True))

    def dens(v, u, what):
        lp, a, b = logpost(v, u)
        f = np.exp(lp - peak)
        return f * (special.betainc(a + x[0], b + n[0] - x[0], spec) if what else 1.0)
    opts = {"epsabs": 1e-10, "epsrel": 1e-7}
    z = integrate.dblquad(dens, lo_u, hi_u, lo_v, hi_v, args=(0,), **opts)[0]
    num = integrate.dblquad(dens, lo_u, hi_u, lo_v, hi_v, args=(1,), **opts)[0]
    return num / z


@pytest.mark.parametrize("x, n", [([1, 0, 2, 0, 1], [80, 50, 125, 80, 50]),
                                  ([0, 0, 0], [50, 80, 125])])
def test_quadrature_probability_within_its_stated_error_of_dblquad(x, n):
    x, n = np.array(x, float), np.array(n, float)
    ref = _dblquad_prob(x, n, 0.01)
    g = grid.posterior_grids([grid.group_terms(x, n)])[0]
    f = pd.DataFrame({"x": x, "n": n})
    cols = qa.answer_group(g, f.x, f.n, pd.array([None] * len(x), "Int64"),
                           np.array(["process"] * len(x), object), 0.01, 0.95)
    p, err = cols["prob_within_spec"][0], cols["prob_within_spec_error"][0]
    assert abs(p - ref) <= max(err, 1e-9), (p, ref, err)


def test_nuts_and_quadrature_agree_within_monte_carlo_error():
    table = lots_table(_frame(parts=1, lots=12, seed=8))
    quad = assess_lots(table, 0.01, 0.95, "history", engine="quadrature",
                       decision_basis="process")
    nuts = assess_lots(table, 0.01, 0.95, "history", decision_basis="process", seed=3)
    assert nuts.converged
    q, e = quad.lots["prob_within_spec"], quad.lots["prob_within_spec_error"]
    p, m = nuts.lots["prob_within_spec"], nuts.lots["prob_within_spec_mcse"]
    # 4 MCSE (normal tails: a false alarm about 6e-5 per lot) plus the stated quadrature error
    assert (np.abs(q - p) <= 4 * m + e).all(), pd.DataFrame({"q": q, "p": p, "m": m})
    # the summaries rest on the same posterior: bounds within the spread of 1,000 draws
    rel = np.abs(quad.lots["upper_bound"] / nuts.lots["upper_bound"] - 1)
    assert rel.max() < 0.05
    assert np.array_equal(quad.lots["outlier_p"].round(6), nuts.lots["outlier_p"].round(6)) \
        or np.abs(quad.lots["outlier_p"] - nuts.lots["outlier_p"]).max() < 0.02
    assert quad.engine["name"] == "quadrature" and nuts.engine["name"] == "nuts"
    assert quad.seed is None and quad.lots["prob_within_spec_mcse"].isna().all()


def test_quadrature_is_deterministic_and_the_same_over_two_processes():
    pytest.importorskip("dask.distributed")
    table = lots_table(_frame(parts=4, lots=6, seed=2))
    one = assess_lots(table, 0.01, 0.9, "history", engine="quadrature")
    again = assess_lots(table, 0.01, 0.9, "history", engine="quadrature")
    from qualbayes import lot_batch

    old = lot_batch.CHUNK_LOTS
    lot_batch.CHUNK_LOTS = 6  # one part per chunk: four chunks over two worker processes
    try:
        split = assess_lots(table, 0.01, 0.9, "history", engine="quadrature", processes=2)
    finally:
        lot_batch.CHUNK_LOTS = old
    pd.testing.assert_frame_equal(one.lots, again.lots)
    pd.testing.assert_frame_equal(one.lots, split.lots)
    assert one.next_lot == split.next_lot
    assert split.engine["processes"] == "dask LocalCluster of 2 processes"


def test_local_process_pool_gives_the_answers_of_one_process(monkeypatch):
    """The command line's pool of new local processes (spawned, four chunks per process)
    against threads in one process: identical frames and next-lot answers."""
    from qualbayes import lot_batch

    table = lots_table(_frame(parts=4, lots=6, seed=3))
    one = assess_lots(table, 0.01, 0.9, "history", engine="quadrature")
    monkeypatch.setattr(lot_batch, "PROCESSES_FROM", 2)
    monkeypatch.setattr("qualbayes.lot_grid_answers.threads", lambda: 2)
    real, chunks = lot_batch._run_pool, []

    def spy(parts, *args):
        chunks.append(len(parts))
        return real(parts, *args)
    monkeypatch.setattr(lot_batch, "_run_pool", spy)
    pooled = assess_lots(table, 0.01, 0.9, "history", engine="quadrature", local_pool=True)
    assert chunks == [4]  # one part a chunk here (24 lots over 4 x 2 chunks of 3 lots)
    library = assess_lots(table, 0.01, 0.9, "history", engine="quadrature")
    pd.testing.assert_frame_equal(one.lots, pooled.lots)
    assert one.next_lot == pooled.next_lot
    assert pooled.engine["processes"] == "2 local processes"
    assert library.engine["processes"] == "one process"  # only a caller that asks


def test_decision_within_the_quadrature_error_is_too_close_to_call():
    dec, close = qa.decide([0.9502, 0.96, 0.03, 0.5], [0.001, 0.001, 0.001, 0.001],
                           [1, 1, 1, 0], 0.95)
    assert list(dec) == ["undecided", "accept", "reject", "undecided"]
    assert list(close) == [True, False, False, False]


def test_engine_options_checked():
    table = lots_table(_frame(parts=1, lots=3))
    with pytest.raises(ParameterError, match="engine"):
        assess_lots(table, 0.01, 0.9, "history", engine="grid")
    with pytest.raises(ParameterError, match="closed form"):
        assess_lots(table, 0.01, 0.9, "uniform", engine="quadrature")
    with pytest.raises(ParameterError, match="processes"):
        assess_lots(table, 0.01, 0.9, "history", processes=2)
    from qualbayes.commands.convert import engine_options

    with pytest.raises(OptionError, match="--prior history"):
        engine_options("quadrature", None, None, history=False)
    with pytest.raises(OptionError, match="one of them"):
        engine_options("quadrature", "2", "tcp://h:8786", history=True)
    with pytest.raises(OptionError, match="scheduler"):
        engine_options("quadrature", None, "h 8786", history=True)
    assert engine_options("quadrature", "3", None, True)["processes"] == 3


def test_missing_dask_names_the_extra(monkeypatch):
    import builtins

    real = builtins.__import__

    def no_dask(name, *args, **kwargs):
        if name.startswith("dask"):
            raise ImportError(name)
        return real(name, *args, **kwargs)
    monkeypatch.setattr(builtins, "__import__", no_dask)
    with pytest.raises(ParameterError, match=r"qualbayes\[cluster\]"):
        assess_lots(lots_table(_frame(parts=1, lots=3)), 0.01, 0.9, "history",
                    engine="quadrature", processes=2)


def test_command_line_quadrature_record_names_engine(tmp_path, capsys):
    import json

    from qualbayes.cli import main

    path = tmp_path / "lots.csv"
    _frame(parts=2, lots=5).to_csv(path, index=False)
    code = main(["lots", str(path), "--spec", "1%", "--prior", "history", "--engine",
                 "quadrature", "--json"])
    out = json.loads(capsys.readouterr().out)
    assert code == 0
    assert out["engine"]["name"] == "quadrature" and out["engine"]["max_error"] < 0.01
    assert all("prob_within_spec_error" in lot for lot in out["lots"])
    # the printed record (no draws: sealed once, not again for --json) carries its own
    # digest: sealing what was printed gives the same one
    from qualbayes.evidence.run_record import seal

    assert out["digest"] == seal(out)["digest"]
    assert main(["lots", str(path), "--spec", "1%", "--engine", "quadrature"]) == 2
    assert main(["lots", str(path), "--spec", "1%", "--prior", "history", "--engine",
                 "quadrature", "--report", str(tmp_path / "rep")]) == 2
    assert not (tmp_path / "rep").exists()
    out_dir = tmp_path / "out"
    assert main(["lots", str(path), "--spec", "1%", "--prior", "history", "--engine",
                 "quadrature", "--out", str(out_dir)]) == 0
    assert (out_dir / "lot_decisions.xlsx").exists()


@pytest.mark.parametrize("lots, seed", [(3, 0), (5, 1), (20, 2)])
def test_stated_error_bounds_the_error_against_a_finer_grid(lots, seed):
    """The stated error (twice the group's largest difference from the half grid, plus
    lost mass) against a 400 x 400 grid of the same posterior, lot and process basis."""
    rng = np.random.default_rng(seed)
    n = rng.choice([50, 80, 125, 200], lots)
    x = rng.binomial(n, rng.beta(2, 150, lots))
    size = pd.array(rng.choice([400, 2000, None], lots), "Int64")
    basis = np.where(size.isna(), "process", "lot").astype(object)
    t = grid.group_terms(x, n)
    fine, ref = grid.posterior_grids([t])[0], grid.posterior_grids([t], size=400)[0]
    for spec in (0.005, 0.01, 0.03):
        got = qa.answer_group(fine, x, n, size, basis, spec, 0.95)
        want = qa.answer_group(ref, x, n, size, basis, spec, 0.95)
        diff = np.abs(got["prob_within_spec"] - want["prob_within_spec"])
        assert (diff <= got["prob_within_spec_error"]).all()
        # the vectorised path of the command (qualbayes/lot_grid_vector.py): the same bound
        vec = qv.answer_group_vector(fine, x, n, size, basis, spec, 0.95)
        diff = np.abs(vec["prob_within_spec"] - want["prob_within_spec"])
        assert (diff <= vec["prob_within_spec_error"]).all()
        err = got["prob_within_spec_error"][0]
        assert abs(qa.next_lot(fine, spec, 0.95, err)["prob_within_spec"]
                   - qa.next_lot(ref, spec, 0.95, 0.0)["prob_within_spec"]) <= err


def test_quadrature_command_imports_no_sampler():
    from conftest import EXAMPLES
    from helpers import heavy_imports

    assert heavy_imports(["lots", str(EXAMPLES / "incoming_inspection.xlsx"), "--spec", "1%",
                          "--prior", "history", "--engine", "quadrature"]) == []


def _zoomed(g, terms, size=200):
    """A finer grid of the same posterior on the box where ``g`` has its mass (half the
    box again on each side), every point kept: the reference for a large group, whose
    command grid (the box of the coarse pass) holds only a few points with weight."""
    u = special.logit(g.mu)
    v = np.log(1.0 / np.sqrt(g.kappa * g.mu * (1.0 - g.mu)) - spread_floor(g.mu))
    on = g.weight > 1e-14
    axes = []
    for c in (u, v):
        lo, hi = c[on].min(), c[on].max()
        axes.append(np.linspace(lo - 0.5 * (hi - lo), hi + 0.5 * (hi - lo), size))
    uu, vv = np.meshgrid(*axes, indexing="ij")
    mu, kappa, lp = grid._prior_terms(uu, vv, HistoryPrior())
    lp = lp + grid.term_loglik(mu * kappa, (1.0 - mu) * kappa, *terms)
    return grid._weights(lp, mu, kappa, size)


@pytest.mark.parametrize("lots", [3_000, 200_000])
def test_stated_error_of_a_large_group_bounds_a_zoomed_finer_grid(lots, monkeypatch):
    """A large group (a Beta(3, 297) process; 200,000 lots: 68 grid points with weight and
    a stated error near 0.0065 at a 1% limit): the stated error of every P, and of the next
    lot's, covers the difference from a 200 x 200 grid zoomed on the posterior's mass plus
    that grid's own stated error (it keeps every point: no mass left out)."""
    rng = np.random.default_rng(1)
    n = rng.choice([50, 80, 125, 200, 315], lots)
    x = rng.binomial(n, rng.beta(3, 297, lots))
    t = grid.group_terms(x, n)
    shown = 300  # the answers of the first lots (each answer uses the whole group's grid)
    size = pd.array(rng.choice([800, 2000, 3200, 5000], shown), "Int64")
    basis = np.where(np.arange(shown) < shown // 5, "process", "lot").astype(object)
    fine = grid.posterior_grids([t])[0]
    zoom = _zoomed(fine, t)
    assert zoom.edge_mass < 1e-12  # the zoomed box holds the mass
    for spec in (0.005, 0.01, 0.02):
        got = qv.answer_group_vector(fine, x[:shown], n[:shown], size, basis, spec, 0.95)
        with monkeypatch.context() as m:
            m.setattr(qa, "PRUNE", 0.0)
            ref = qv.answer_group_vector(zoom, x[:shown], n[:shown], size, basis, spec, 0.95)
        err, ref_err = got["prob_within_spec_error"], ref["prob_within_spec_error"][0]
        assert ref_err < 0.01 * err[0]  # the reference is much finer
        diff = np.abs(got["prob_within_spec"] - ref["prob_within_spec"])
        assert (diff + ref_err <= err).all(), (spec, diff.max(), err[0])
        nxt = abs(qa.next_lot(fine, spec, 0.95, err[0])["prob_within_spec"]
                  - qa.next_lot(zoom, spec, 0.95, 0.0)["prob_within_spec"])
        assert nxt + ref_err <= err[0]
