r"""A prior learned from a part's lot history (the only planning path that runs a sampler).

The lots of one part number are fitted with the hierarchical beta-binomial of
:mod:`qualbayes.models.lot_history` (NUTS on :math:`(\mu, \kappa)`, lot rates marginalised).
The prior for a new lot or design generation is its predictive,

.. math:: p_{new} \sim \frac1D \sum_d \mathrm{Beta}(\mu_d\kappa_d,\; (1-\mu_d)\kappa_d),

over the D posterior draws, and reliability is :math:`R = 1 - p_{new}`. The convergence gate
must pass: otherwise no prior is returned and no plan is given (``not-converged``).

Every plan number from this prior is exact given the draws; the draws themselves are a Monte
Carlo sample, so :meth:`HistoryPrior.describe` gives the MCSE of the prior mean
:math:`\frac1D\sum_d \mu_d` and the plans give the MCSE of the probabilities that decide
them (:mod:`qualbayes.planning.draw_error`).
jax and numpyro are imported only inside :func:`learn_prior`.
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np

from qualbayes.errors import OptionError
from qualbayes.planning.rate_prior import RatePrior


@dataclass
class HistoryPrior:
    """The learned prior (None when the gate failed) and where it came from."""

    prior: RatePrior | None
    file: str
    sheet: str | None
    part: str
    lots: int
    units: int
    defectives: int
    sha256: str
    gate: dict = field(default_factory=dict)
    #: the draws are stored chain after chain: the Monte Carlo error needs the chains
    chains: int = 1

    @property
    def passed(self) -> bool:
        return bool(self.gate.get("passed"))

    def describe(self) -> dict:
        d = {"file": self.file, "sheet": self.sheet, "part": self.part, "lots": self.lots,
             "units_inspected": self.units, "defectives": self.defectives,
             "sha256": self.sha256, "convergence_gate": self.gate}
        if self.prior is not None:
            d["prior"] = self.prior.label
            d["components"] = self.prior.components
            d["mean_defect_rate"] = self.prior.mean()
            d["mean_defect_rate_mcse"] = self.mean_mcse()
            d["monte_carlo"] = ("plan numbers are exact given these posterior draws; the "
                                "draws carry Monte Carlo error, given as MCSE")
        return d


    def mean_mcse(self) -> float | None:
        """MCSE of the prior mean defect rate (the mean over draws of mu)."""
        if self.prior is None:
            return None
        from qualbayes.planning.draw_error import mean_mcse  # noqa: PLC0415

        mu = self.prior.a / (self.prior.a + self.prior.b)
        return mean_mcse(mu, chains=self.chains)[1]


def learn_prior(path, part: str | None = None, sheet: str | None = None,
                columns: str | dict | None = None, seed: int = 20261202,
                settings=None) -> HistoryPrior:
    """Fit the lot history of one part and return its next-lot predictive as a prior.

    ``path``: an inspection export, a pandas DataFrame of lots or a LotTable (the same
    validation as a file)."""
    from qualbayes.data.frames import lots_table, source_sha256  # noqa: PLC0415
    from qualbayes.inference.run import SamplerSettings, jax_scope  # noqa: PLC0415 - jax path
    from qualbayes.models.lot_history import fit_histories  # noqa: PLC0415

    table = lots_table(path, sheet=sheet, columns=columns)
    sha = source_sha256(path)
    path = table.file
    frame = table.frame
    parts = frame["part"].fillna("(no part number)").astype(str)
    names = list(dict.fromkeys(parts))
    if part is None:
        if len(names) > 1:
            raise OptionError(f"{path} holds lots of {len(names)} part numbers "
                              f"({', '.join(names)}): choose one with --part")
        part = names[0]
    elif part not in names:
        raise OptionError(f"--part {part!r}: not in {path} (part numbers: {', '.join(names)})")
    mine = (parts == part).to_numpy()
    x = frame["defectives"].to_numpy(float)[mine]
    n = frame["inspected"].to_numpy(float)[mine]
    if len(x) < 2:
        raise OptionError(f"part {part!r} has {len(x)} lot in {path}: a history needs at "
                          "least two lots")
    settings = settings or SamplerSettings(seed=seed)
    with jax_scope():
        fit = fit_histories([(x, n)], settings, names=[part])
    gate = fit.gate.select(part).to_dict()
    prior = None
    if gate["passed"]:
        mu = fit.draws["mu"][:, :, 0].reshape(-1)
        kappa = fit.draws["kappa"][:, :, 0].reshape(-1)
        prior = RatePrior.mixture(
            mu * kappa, (1.0 - mu) * kappa,
            f"next-lot predictive of part {part} from {len(x)} lots: defect rate p (= 1 - R) "
            f"~ mixture of {mu.size} Beta(mu*kappa, (1-mu)*kappa) over posterior draws")
    return HistoryPrior(prior, str(path), table.sheet, part, int(len(x)), int(np.sum(n)),
                        int(np.sum(x)), sha or "", gate, chains=int(fit.draws["mu"].shape[0]))
