"""Light commands must not import jax (speed rule: keep jax off light commands)."""

from conftest import EXAMPLES
from helpers import heavy_imports


def test_conjugate_lots_command_never_imports_jax():
    assert heavy_imports(["lots", str(EXAMPLES / "incoming_inspection.xlsx"), "--spec",
                          "1%"]) == []


def test_plan_questions_with_priors_and_sensitivity_never_import_jax():
    """Every plan without --history is closed form: no sampler, no plotting without --out."""
    assert heavy_imports(
        ["plan", "life", "--reliability", "0.9", "--confidence", "0.9", "--mission", "1000",
         "--units", "10", "--shape-range", "1.5,3", "--failures", "1", "--believe",
         "R>0.8@95%;R=0.95", "--sensitivity"],
        ["plan", "sampling", "--aql", "0.5%", "--ltpd", "3%", "--believe", "p<1%@90%",
         "--sensitivity"],
        ["plan", "attribute", "--reliability", "0.9", "--confidence", "0.9", "--sensitivity"],
        ["plan", "mtbf", "--mtbf", "600", "--confidence", "0.8", "--sensitivity"],
    ) == []
