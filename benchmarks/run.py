"""Benchmark every budget of the issues: ``python benchmarks/run.py [--quick] [--json]``.

A thin launcher for :func:`advisory.bench.benchmark.main` (also ``boom-advisory bench``); works
from a fresh clone without installing the package. See ``--help`` for the options.
"""

from __future__ import annotations

import sys
from pathlib import Path

if __name__ == "__main__":
    root = Path(__file__).resolve().parent.parent
    if str(root) not in sys.path:
        sys.path.insert(0, str(root))
    from advisory.bench.benchmark import main

    sys.exit(main(sys.argv[1:]))
