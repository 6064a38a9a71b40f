"""The aircraft-side pipeline, one cycle: validated state, trajectory ahead, footprint
from the tables, zones, conflicts, levels, resolutions, and the advisor that runs them.

The names below are imported lazily, so ``import advisory.pipeline`` stays light (the
advisor pulls in numba and the table code).
"""

from __future__ import annotations

import importlib
from typing import TYPE_CHECKING, Any

if TYPE_CHECKING:  # for type checkers only; at run time the names load on first use
    from advisory.pipeline.advisor import Advisor
    from advisory.pipeline.airdata import AirDataState
    from advisory.pipeline.config import AdvisorConfig
    from advisory.pipeline.results import Advisory
    from advisory.pipeline.zones import ZoneSet

__all__ = ["Advisor", "Advisory", "AdvisorConfig", "AirDataState", "ZoneSet"]

_HOME = {
    "Advisor": "advisory.pipeline.advisor",
    "Advisory": "advisory.pipeline.results",
    "AdvisorConfig": "advisory.pipeline.config",
    "AirDataState": "advisory.pipeline.airdata",
    "ZoneSet": "advisory.pipeline.zones",
}


def __getattr__(name: str) -> Any:
    """Lazy public names of the pipeline (see ``__all__``)."""
    home = _HOME.get(name)
    if home is None:
        raise AttributeError(f"module 'advisory.pipeline' has no attribute {name!r}")
    return getattr(importlib.import_module(home), name)
