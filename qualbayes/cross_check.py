r"""Cross-check of every NUTS answer of a two-parameter posterior by deterministic quadrature.

After a lot-history fit (per group) and a Weibull life fit (per group), the probabilities
that decide are recomputed on a grid (:mod:`qualbayes.models.lot_history_grid`,
:mod:`qualbayes.models.weibull_grid`) and compared with the draws' answers:

* lots: for every distinct (x, n) of the group, :math:`P(p_{lot} \le spec \mid data)`
  (Rao-Blackwellised over draws: the mean of the conditional Beta's CDF), and the next lot's
  :math:`P(p \le spec)`;
* life: :math:`P(R(mission) \ge target \mid data)` and the posterior mean of
  :math:`R(mission)`.

Each difference must be within the tolerance

.. math::

    \max\bigl(4\,\mathrm{MCSE},\ 4\sqrt{q(1-q)/S},\ \epsilon_{quad}\bigr)

with MCSE from the draws (:func:`qualbayes.inference.mcse.mcse_mean`, chain by chain), :math:`q` the
quadrature answer and :math:`S` the number of draws (the floor for an indicator whose draws
are all equal, where the MCSE is zero), and :math:`\epsilon_{quad}` the quadrature error
(difference from the grid of every other point plus the border mass). A disagreement fails
the convergence gate of that group: :func:`attach` sets ``passed`` to False and adds the
reason, so no verdict is given. At 4 MCSE a correct fit disagrees by chance for about 6 in
100,000 compared quantities (normal tails).
"""

from __future__ import annotations

import numpy as np
from scipy import special

from qualbayes.inference.mcse import mcse_mean

MCSE_TIMES = 4.0


def _compare(names, nuts, mcse, quad, quad_err, draws: int, method: str) -> dict:
    nuts, mcse = np.asarray(nuts, float), np.asarray(mcse, float)
    quad, quad_err = np.asarray(quad, float), np.asarray(quad_err, float)
    floor = np.sqrt(np.clip(quad * (1.0 - quad), 0.0, None) / draws)
    tol = np.maximum.reduce([MCSE_TIMES * np.nan_to_num(mcse), MCSE_TIMES * floor, quad_err])
    diff = np.abs(nuts - quad)
    bad = ~(diff <= tol)  # NaN disagrees
    worst = int(np.argmax(np.where(np.isfinite(diff), diff - tol, np.inf)))
    return {"method": method, "quantities": len(diff),
            "max_abs_diff": float(np.nanmax(diff)) if np.isfinite(diff).any() else None,
            "tolerance": float(tol[worst]), "agreed": not bool(bad.any()),
            "worst": {"quantity": names[worst], "nuts": float(nuts[worst]),
                      "quadrature": float(quad[worst]), "mcse": float(mcse[worst])}}


def lot_quadrature(data, spec: float, prior, chunk: int = 64, stop=None) -> list[tuple] | None:
    """The quadrature side of each group's cross-check, which needs no draws (so it can be
    computed while the sampler runs): per group of ``data`` ((x, n) arrays), (distinct x,
    distinct n, quadrature answers q, their error), q being P(p <= spec | x of n) for every
    distinct (x, n) then the next lot's P(p <= spec), on the 160 x 160 grid, the error its
    difference from the 100 x 100 grid plus the border mass. Groups are taken ``chunk`` at
    a time (:func:`qualbayes.models.lot_history_grid.posterior_grids`), and only these
    numbers are kept: the grids of one chunk at most are in memory. ``stop`` (an Event):
    once set, None is returned before the next chunk."""
    from qualbayes.models import lot_history_grid as grid  # noqa: PLC0415

    terms = [grid.group_terms(*d) for d in data]
    out = []
    for start in range(0, len(terms), chunk):
        if stop is not None and stop.is_set():
            return None
        block = terms[start:start + chunk]
        fine = grid.posterior_grids(block, prior, size=160, chunk=chunk)
        half = grid.posterior_grids(block, prior, size=100, chunk=chunk)
        for (xs, ns, _), g, g2 in zip(block, fine, half, strict=True):
            q = np.append(grid.prob_within(g, xs, ns, spec), grid.next_lot_prob(g, spec))
            q2 = np.append(grid.prob_within(g2, xs, ns, spec), grid.next_lot_prob(g2, spec))
            out.append((xs, ns, q, np.abs(q - q2) + g.edge_mass))
    return out


def lot_group(mu, kappa, x, n, spec: float, prior, quadrature=None) -> dict:
    """Cross-check of one group's lot-history draws (``mu``, ``kappa`` of shape (chain,
    draw)) against :func:`qualbayes.models.lot_history_grid.posterior_grid`;
    ``quadrature``: the group's entry of :func:`lot_quadrature` when already computed."""
    xs, ns, q, q_err = quadrature or lot_quadrature([(x, n)], spec, prior)[0]
    a = (mu * kappa)[..., None]
    b = ((1.0 - mu) * kappa)[..., None]
    per_draw = np.concatenate([special.betainc(a + xs, b + ns - xs, spec),
                               special.betainc(a, b, spec)], axis=-1)
    names = [f"P(p <= spec | {x:g} of {n:g})" for x, n in zip(xs, ns, strict=True)]
    return _compare(names + ["P(next lot p <= spec)"], per_draw.mean((0, 1)),
                    mcse_mean(per_draw), q, q_err, mu.size,
                    "2-D quadrature of (logit mu, log(tau - tau_lo)), 160 x 160 grid")


def lot_groups(held: dict, data, names, spec: float, prior,
               quadrature: list | None = None) -> dict[str, dict | None]:
    """label -> cross-check of each group whose gate passed (None otherwise). ``held[label]``:
    the fit holding the group's draws and the group's part in it (a close call may have
    continued some groups' chains in a later fit). ``quadrature``: :func:`lot_quadrature`
    of every group of ``data``, when computed beforehand (while the sampler ran); otherwise
    the passed groups' are computed here."""
    passed = [j for j, label in enumerate(names) if held[label][0].gate.select(label).passed]
    if quadrature is None:
        quad = dict(zip(passed, lot_quadrature([data[j] for j in passed], spec, prior),
                        strict=True))
    else:
        quad = dict(enumerate(quadrature))
    out: dict[str, dict | None] = dict.fromkeys(names)
    for j in passed:
        x, n = data[j]
        fit, i = held[names[j]]
        out[names[j]] = lot_group(fit.draws["mu"][:, :, i], fit.draws["kappa"][:, :, i], x, n,
                                  spec, prior, quadrature=quad[j])
    return out


def life_group(st, prior, mode, log_shape, log_scale, mission: float, target: float) -> dict:
    """Cross-check of one Weibull group's draws (log shape, log scale; (chain, draw))."""
    from qualbayes.models.weibull_grid import posterior_grid  # noqa: PLC0415

    with np.errstate(over="ignore"):
        r = np.exp(-np.exp(np.exp(log_shape) * (np.log(mission) - log_scale)))
    per_draw = np.stack([(r >= target).astype(float), r], axis=-1)
    g = posterior_grid(st, prior, mode)
    p, p_err = g.prob_reliability_at_least(mission, target)
    m, m_err = g.mean_reliability(mission)
    return _compare(["P(R(mission) >= target)", "E[R(mission)]"], per_draw.mean((0, 1)),
                    mcse_mean(per_draw), [p, m], [p_err, m_err], r.size,
                    "2-D quadrature of (log shape, log H(t_ref)), 201 x 201 grid on the "
                    "Laplace scales")


def agrees(check: dict | None) -> bool:
    """True unless a cross-check was run and disagreed."""
    return check is None or bool(check["agreed"])


def attach(diagnostics: dict, check: dict | None) -> dict:
    """The gate dict with the cross-check added; a disagreement fails it with its reason."""
    if check is None:
        return diagnostics
    out = dict(diagnostics, cross_check=check)
    if not check["agreed"]:
        w = check["worst"]
        out["passed"] = False
        out["reasons"] = [*diagnostics.get("reasons", []),
                          f"the NUTS answer disagrees with quadrature: {w['quantity']} is "
                          f"{w['nuts']:.5f} from the draws and {w['quadrature']:.5f} by "
                          f"quadrature (difference beyond the tolerance "
                          f"{check['tolerance']:.2g}); no verdict is given"]
    return out


def summary_line(checks: dict[str, dict | None]) -> str:
    """One line for the terminal: how the cross-check went over all groups."""
    done = {k: c for k, c in checks.items() if c}
    if not done:
        return "quadrature cross-check: not run (no group passed the convergence gate)"
    bad = [k for k, c in done.items() if not c["agreed"]]
    worst = max(c["max_abs_diff"] or 0.0 for c in done.values())
    if bad:
        return (f"quadrature cross-check FAILED for {', '.join(bad)}: those carry no "
                f"verdict (largest difference {worst:.2g})")
    return (f"quadrature cross-check: NUTS agrees with quadrature for all {len(done)} "
            f"group(s) (largest difference {worst:.2g}, within tolerance)")


def sheet_rows(label: str, diagnostics: dict) -> list[list]:
    """The workbook's Diagnostics row of one group's cross-check (none if not run)."""
    c = diagnostics.get("cross_check")
    if not c:
        return []
    diff = float("nan") if c["max_abs_diff"] is None else c["max_abs_diff"]
    return [[label, "quadrature cross-check", None, None, None, c["agreed"], None, None,
             f"max |NUTS - quadrature| {diff:.2g} over {c['quantities']} "
             f"probabilities; tolerance max(4 MCSE, quadrature error) {c['tolerance']:.2g}"]]
