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
