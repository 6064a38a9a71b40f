"""Benchmark every budget of the issues: ``python benchmarks/run.py [--quick] [--json]``.

A thin launcher for ``boom-advisory bench`` (:mod:`advisory.cli.bench`); works from a
fresh clone without installing the package. See ``--help`` for the options.
"""

from __future__ import annotations

import sys
from pathlib import Path

if __name__ == "__main__":
    root = Path(__file__).resolve().parent.parent
    if str(root) not in sys.path:
        sys.path.insert(0, str(root))
    # imported after the path is set, so that a fresh clone runs without installing
    from advisory.cli import main

    sys.exit(main(["bench", *sys.argv[1:]]))
