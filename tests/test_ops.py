"""Operations: what an integrator asks of the command line.

Expected values: the project's interface document (``docs/interface.md`` section 17.7)
and the package version in ``advisory/schema.py`` (one home; pyproject reads it).
"""

from __future__ import annotations

import subprocess
import sys

from advisory.schema import SAFETY_CAUTION, VERSION


def test_version_prints_the_version_and_the_caution() -> None:
    # ICD 17.7: `boom-advisory --version` prints the version and the caution, exit 0
    res = subprocess.run([sys.executable, "-m", "advisory.cli", "--version"],
                         capture_output=True, text=True, timeout=60)
    assert res.returncode == 0, res.stderr
    assert res.stdout.splitlines()[0] == f"boom-advisory {VERSION}"
    assert SAFETY_CAUTION in res.stdout
