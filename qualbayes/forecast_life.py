"""The life law behind a field-return forecast, from life-test data of one group: the
Weibull posterior (NUTS, gated), as ``life`` fits it, in the form
:func:`qualbayes.field_forecast.forecast_fleet` takes (the same steps as the ``returns``
command's plain life fit, for the Python API)."""

from __future__ import annotations

import numpy as np

from qualbayes.data.life import LifeTable, frame_arrays


def shape_prior(shape_range: tuple[float, float] | None):
    """The Weibull prior with the shape's central 95% range (default prior when None)."""
    from qualbayes.models.weibull_prior import LifePrior, lognormal_from_range  # noqa: PLC0415

    if shape_range is None:
        return LifePrior()
    lo, hi = shape_range
    return LifePrior(shape=lognormal_from_range(lo, hi), shape_given=True,
                     shape_range=(lo, hi))


def reach_notes(table: LifeTable, reach: float) -> list[str]:
    """Say so when the forecast runs to ages beyond the longest time in the life data."""
    longest = float(table.frame["lower"].max())
    if reach <= longest:
        return []
    return [f"the forecast reaches ages up to {reach:,.0f}, beyond the longest time in the "
            f"life data ({longest:,.0f}): there the Weibull law is extrapolated, and a "
            "wear-out mode that the test did not reach would not be foreseen"]


def weibull_life(table: LifeTable, shape_range, settings, gate_time: float,
                 reach: float) -> dict:
    """The life part of a returns record (file, source, prior, gate, summary, notes,
    sha256) with the draws (``LifeDraws``) under ``draws``."""
    return weibull_life_with_prior(table, shape_prior(shape_range), settings, gate_time,
                                   reach)


def weibull_life_with_prior(table: LifeTable, prior, settings, gate_time: float,
                            reach: float) -> dict:
    """As :func:`weibull_life`, with the prior given as a ``LifePrior`` (the command line
    builds it from its option text)."""
    from qualbayes.life_question import check_prior_use  # noqa: PLC0415
    from qualbayes.models.forecast import LifeDraws  # noqa: PLC0415
    from qualbayes.models.life import fit_life  # noqa: PLC0415
    from qualbayes.models.weibull import group_stats, posterior_mode  # noqa: PLC0415

    name = table.groups[0]
    st = group_stats(**frame_arrays(table.frame))
    check_prior_use(table, {name: st}, prior)
    mode = posterior_mode(st, prior)
    fit = fit_life([st], [mode], prior, settings, [name], gate_time)
    b, log_eta = fit.draws["log_shape"][:, :, 0], fit.draws["log_scale"][:, :, 0]
    return {"file": table.file, "source": "Weibull fit of the life data (as 'life')",
            "prior": prior.describe(table.units), "diagnostics": fit.gate.to_dict(),
            "summary": {"shape median": float(np.median(np.exp(b))),
                        "scale median": float(np.median(np.exp(log_eta))),
                        "units": st.units, "failures": st.failures},
            "notes": reach_notes(table, reach), "sha256": table.sha256,
            "draws": LifeDraws(log_eta, np.exp(-b), "weibull")}
