"""qualbayes: Bayesian lot acceptance and reliability decisions for quality engineers.

The questions, from Python (DataFrames or files in, result objects out; keyword-only
options checked on entry, errors naming the parameter):

* lots: ``assess_lots(data, spec=..., confidence=0.95, prior="uniform")`` -> LotResult
* life: ``assess_life(data, mission=..., target=..., confidence=0.9)`` -> LifeResult
* plans: ``plan_attribute``, ``plan_life``, ``plan_mtbf``, ``plan_sampling`` -> PlanResult
* suppliers: ``assess_suppliers(data, spec=..., period=None)`` -> SupplierResult
* at use: ``assess_at_use(data, stress_column=..., relation=..., use=..., mission=...,
  target=...)`` -> AtUseResult
* returns: ``forecast_returns(fleet, life=..., usage=..., horizon=24)`` -> ForecastResult
* priors: ``qualbayes.priors`` (``Beta``, ``Gamma``, ``LogNormal``, ``from_statements``,
  ``power``, ``sensitivity``)

Importing this package imports neither jax nor arviz, and no call changes the process's
jax configuration (see docs/api.md).
"""

from __future__ import annotations

__version__ = "0.1.0"

from qualbayes.caution import CAUTION  # noqa: E402
from qualbayes.errors import InputError, OptionError, ParameterError  # noqa: E402

_LAZY = {
    "assess_lots": "qualbayes.api", "assess_life": "qualbayes.api",
    "plan_attribute": "qualbayes.api", "plan_life": "qualbayes.api",
    "plan_mtbf": "qualbayes.api", "plan_sampling": "qualbayes.api",
    "assess_suppliers": "qualbayes.api_more", "assess_at_use": "qualbayes.api_more",
    "forecast_returns": "qualbayes.api_more",
    "LotResult": "qualbayes.results", "LifeResult": "qualbayes.results",
    "PlanResult": "qualbayes.results", "DrawCountError": "qualbayes.results",
    "SupplierResult": "qualbayes.results_more", "AtUseResult": "qualbayes.results_more",
    "ForecastResult": "qualbayes.results_more",
    "read_lots": "qualbayes.data.lot_table", "LotTable": "qualbayes.data.lot_table",
    "read_life": "qualbayes.data.life", "LifeTable": "qualbayes.data.life",
    "LotAssessment": "qualbayes.lot_question", "LifeAssessment": "qualbayes.life_question",
    "parse_probability": "qualbayes.questions", "parse_rate": "qualbayes.questions",
}


def __getattr__(name: str):
    if name in _LAZY:
        import importlib  # noqa: PLC0415

        return getattr(importlib.import_module(_LAZY[name]), name)
    raise AttributeError(f"module 'qualbayes' has no attribute {name!r}")


__all__ = ["CAUTION", "InputError", "OptionError", "ParameterError", "__version__", *_LAZY]
