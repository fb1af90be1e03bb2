r"""Building prior objects from Python: from statements, and from earlier data at a weight.

``from_statements("p<0.5%@90%")`` solves for the prior that meets the statements exactly
(:mod:`qualbayes.priors.elicit`): a :class:`~qualbayes.priors.distributions.Beta` on p (a
reliability R is stated on p = 1 - R), a :class:`~qualbayes.priors.distributions.Gamma` on a
failure rate (an MTBF on rate = 1/MTBF), a :class:`~qualbayes.priors.distributions.LogNormal`
on a Weibull shape, scale or B-life. The result carries the solved statements in ``source``.

``power(earlier, weight, base=...)`` is the power prior of Ibrahim & Chen (2000), Statistical
Science 15:46: :math:`\pi(\theta) \propto L(\theta \mid D_0)^w\,\pi_0(\theta)`; for a Beta base
and x0 of n0 it is :math:`\mathrm{Beta}(a_0 + w x_0, b_0 + w(n_0 - x_0))`, for a Gamma base
and r0 failures in T0 it is :math:`\mathrm{Gamma}(a_0 + w r_0, b_0 + w T_0)`.

>>> prior = from_statements("p<0.5%@90%")
>>> round(float(prior.cdf(0.005)), 10)
0.9
>>> power((2, 500), 0.5)
Beta(a=2.0, b=250.0, variable='p', label='power prior, weight 0.5')
"""

from __future__ import annotations

from qualbayes.errors import OptionError, ParameterError
from qualbayes.priors.distributions import Beta, Gamma, from_elicited

ALL_QUANTITIES = ("p", "R", "R(T)", "shape", "scale", "B", "rate", "mtbf")


def from_statements(statements, *, what: str | None = None):
    """The prior that meets one or two statements on one quantity exactly.

    ``statements``: text (``"p<0.5%@90%"``, several separated by ``;``) or a list of texts.
    Raises :class:`~qualbayes.errors.ParameterError` (parameter ``statements``) saying what
    is wrong when no prior of the family can meet them."""
    from qualbayes.priors.elicit import elicit  # noqa: PLC0415
    from qualbayes.priors.statements import parse_statements  # noqa: PLC0415

    if not isinstance(statements, str | list | tuple):
        raise ParameterError("statements", statements, "give text such as 'p<0.5%@90%' or a "
                                                       "list of such texts")
    try:
        parsed = parse_statements(statements, ALL_QUANTITIES, option="statement")
        return from_elicited(elicit(parsed, option="statements", what=what))
    except OptionError as err:
        raise ParameterError("statements", statements, str(err)) from None


def _earlier_counts(earlier):
    """(failures, units) from a tuple, an EarlierCounts, or a table of lots (pooled)."""
    from qualbayes.priors.power_prior import EarlierCounts  # noqa: PLC0415

    if isinstance(earlier, EarlierCounts):
        return earlier
    if isinstance(earlier, tuple) and len(earlier) == 2:
        from qualbayes.parameters import count  # noqa: PLC0415

        x, n = count(earlier[0], "earlier", 0), count(earlier[1], "earlier", 1)
        if x > n:
            raise ParameterError("earlier", earlier, "the failures exceed the units")
        return EarlierCounts(x, n, f"stated: {x} in {n} units")
    from qualbayes.data.frames import lots_table  # noqa: PLC0415

    table = lots_table(earlier)
    f = table.frame
    return EarlierCounts(int(f["defectives"].sum()), int(f["inspected"].sum()),
                         f"earlier lots ({table.file})", int(len(f)))


def _earlier_exposure(earlier):
    from qualbayes.parameters import count, positive  # noqa: PLC0415
    from qualbayes.priors.power_prior import EarlierExposure  # noqa: PLC0415

    if isinstance(earlier, EarlierExposure):
        return earlier
    if not (isinstance(earlier, tuple) and len(earlier) == 2):
        raise ParameterError("earlier", earlier, "give (failures, total unit-time)")
    r, t = count(earlier[0], "earlier", 0), positive(earlier[1], "earlier")
    return EarlierExposure(r, t, f"stated: {r} failures in {t:g}")


def power(earlier, weight: float, *, base=None):
    """The power prior: ``base`` (default: the uniform Beta(1, 1) for counts) times the
    likelihood of the ``earlier`` data to the power ``weight`` in [0, 1].

    ``earlier``: (failures, units) or a table of earlier lots (DataFrame, LotTable, path)
    for a Beta base; (failures, total unit-time) for a Gamma base; earlier life data (a
    DataFrame, LifeTable or path) for a life base (a ``LifePrior``)."""
    from qualbayes.parameters import number  # noqa: PLC0415

    w = number(weight, "weight")
    if not 0.0 <= w <= 1.0:
        raise ParameterError("weight", weight, "must lie between 0 (ignore the earlier data) "
                                               "and 1 (pool them with the new data)")
    base = Beta(1.0, 1.0) if base is None else base
    label = f"power prior, weight {w:g}"
    if isinstance(base, Beta):
        e = _earlier_counts(earlier)
        return Beta(base.a + w * e.failures, base.b + w * (e.units - e.failures),
                    base.variable, label, e)
    if isinstance(base, Gamma):
        e = _earlier_exposure(earlier)
        return Gamma(base.a + w * e.failures, base.rate + w * e.time, base.variable, label, e)
    from qualbayes.models.weibull import LifePrior  # noqa: PLC0415

    if isinstance(base, LifePrior):
        from qualbayes.data.frames import life_table  # noqa: PLC0415
        from qualbayes.data.life import frame_arrays  # noqa: PLC0415
        from qualbayes.models.weibull import group_stats  # noqa: PLC0415
        from qualbayes.priors.power_prior import EarlierLife, life_power_prior  # noqa: PLC0415

        table = life_table(earlier)
        st = group_stats(**frame_arrays(table.frame))
        return life_power_prior(base, EarlierLife(st, f"earlier units ({table.file})", None,
                                                  st.units, st.failures), w)
    raise ParameterError("base", base, "expected a Beta, a Gamma or a LifePrior")
