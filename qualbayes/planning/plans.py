"""The planning questions as the engineer asks them, answered as plan records (the API
behind ``qualbayes plan ...``). Pure computation: no files are read or written here. One
module per question: ``attribute_plan``, ``life_plan``, ``mtbf_plan``, ``sampling_plan``
(shared pieces in ``plan_common``); this module keeps their names importable together."""

from qualbayes.planning.attribute_plan import plan_attribute
from qualbayes.planning.life_plan import default_units, plan_life
from qualbayes.planning.mtbf_plan import plan_mtbf
from qualbayes.planning.plan_common import MAX_OC_SERIES
from qualbayes.planning.sampling_plan import plan_sampling

__all__ = ["MAX_OC_SERIES", "default_units", "plan_attribute", "plan_life", "plan_mtbf",
           "plan_sampling"]
