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


def _parse_only_heavy(argvs: list[list[str]]) -> list[str]:
    """Build the parser and parse each argument list (no command run) in a fresh process."""
    import json
    import subprocess
    import sys

    from helpers import HEAVY

    code = ("import json, sys\nfrom qualbayes.cli import build_parser\np = build_parser()\n"
            f"for argv in {argvs!r}:\n    p.parse_args(argv)\n"
            f"print(json.dumps([m for m in {HEAVY!r} if m in sys.modules]))\n")
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True,
                         check=True).stdout
    return json.loads(out.strip().splitlines()[-1])


def test_sampling_commands_import_nothing_heavy_before_they_run():
    """At parse time no command (also at-use, returns, life and the history prior) loads
    the sampler or plotting stack: only the fit does (bench/bench_import.py measures it)."""
    lots = str(EXAMPLES / "incoming_inspection.csv")
    life = str(EXAMPLES / "sv30_rig_test.csv")
    assert _parse_only_heavy([
        ["lots", lots, "--spec", "1%", "--prior", "history"],
        ["life", life, "--mission", "2000", "--target", "0.9"],
        ["at-use", life, "--use", "40", "--mission", "2000", "--target", "0.9"],
        ["returns", str(EXAMPLES / "sv30_field_returns.csv"), "--life", life, "--usage", "10"],
    ]) == []


def test_quadrature_cross_check_and_weibull_grid_import_no_sampler():
    """The cross-check runs after every fit but is numpy/scipy only."""
    import subprocess
    import sys

    code = ("import sys, qualbayes.cross_check, qualbayes.models.weibull_grid\n"
            "print([m for m in ('jax', 'numpyro', 'arviz', 'matplotlib') if m in sys.modules])")
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True,
                         check=True).stdout
    assert out.strip().splitlines()[-1] == "[]"
