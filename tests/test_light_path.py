"""The conjugate path must not import jax (speed rule: keep jax off light commands)."""

import subprocess
import sys

from conftest import EXAMPLES


def test_conjugate_lots_command_never_imports_jax():
    code = (
        "import sys\n"
        "from qualbayes.cli import main\n"
        f"rc = main(['lots', {str(EXAMPLES / 'incoming_inspection.xlsx')!r}, '--spec', '1%'])\n"
        "assert rc == 0\n"
        "heavy = [m for m in ('jax', 'numpyro', 'arviz', 'matplotlib') if m in sys.modules]\n"
        "print('HEAVY', heavy)\n"
    )
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True,
                         check=True).stdout
    assert "HEAVY []" in out


def test_plan_questions_with_priors_and_sensitivity_never_import_jax():
    """Every plan without --history is closed form: no sampler, no plotting without --out."""
    plans = [
        ["plan", "life", "--reliability", "0.9", "--confidence", "0.9", "--mission", "1000",
         "--units", "10", "--shape-range", "1.5,3", "--failures", "1", "--believe",
         "R>0.8@95%;R=0.95", "--sensitivity"],
        ["plan", "sampling", "--aql", "0.5%", "--ltpd", "3%", "--believe", "p<1%@90%",
         "--sensitivity"],
        ["plan", "attribute", "--reliability", "0.9", "--confidence", "0.9", "--sensitivity"],
        ["plan", "mtbf", "--mtbf", "600", "--confidence", "0.8", "--sensitivity"],
    ]
    code = (
        "import sys, io, contextlib\n"
        "from qualbayes.cli import main\n"
        "with contextlib.redirect_stdout(io.StringIO()):\n"
        f"    rcs = [main(argv) for argv in {plans!r}]\n"
        "assert rcs == [0, 0, 0, 0], rcs\n"
        "heavy = [m for m in ('jax', 'numpyro', 'arviz', 'matplotlib') if m in sys.modules]\n"
        "print('HEAVY', heavy)\n"
    )
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True,
                         check=True).stdout
    assert "HEAVY []" in out
