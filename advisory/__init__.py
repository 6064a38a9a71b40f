"""boom-advisory: sonic-boom carpet prediction and crew advisories.

ADVISORY AID ONLY. This package is not certified flight software and is not a
primary means of navigation or of regulatory compliance. Local regulations and
licensed practice govern supersonic flight.

The public API for an integrator::

    from advisory import Advisor, AirDataState, load_table, load_zones

    advisor = Advisor(load_table("cruise.boomtable"), load_zones("zones.geojson"))
    adv = advisor.step(AirDataState.from_fields(fields, rx_monotonic=now), now)
    adv.status  # one of advisory.schema.ADV_STATUSES

``import advisory`` stays light (no numpy, no numba): the names below that need the
pipeline are imported on first use.
"""

from __future__ import annotations

from importlib import import_module
from pathlib import Path
from typing import TYPE_CHECKING, Any

if TYPE_CHECKING:
    from advisory.pipeline.advisor import Advisor
    from advisory.pipeline.config import AdvisorConfig
    from advisory.pipeline.results import Advisory
    from advisory.pipeline.state import AirDataState
    from advisory.pipeline.zones import ZoneSet
    from advisory.tables.table import BoomTable

from advisory.schema import SAFETY_CAUTION, VERSION

__version__ = VERSION

__all__ = [
    "SAFETY_CAUTION",
    "Advisor",
    "AdvisorConfig",
    "Advisory",
    "AirDataState",
    "__version__",
    "load_table",
    "load_zones",
]

#: Public name -> the module that defines it, imported on first use.
_LAZY = {
    "Advisor": "advisory.pipeline.advisor",
    "Advisory": "advisory.pipeline.results",
    "AdvisorConfig": "advisory.pipeline.config",
    "AirDataState": "advisory.pipeline.state",
}


def load_table(path: str | Path) -> BoomTable:
    """Load and check a precomputed boom table file (:meth:`BoomTable.load`).

    Raises
    ------
    ValueError
        The file cannot be read, fails its SHA-256 check or has another format; the
        message names the file.
    """
    # Imported here, not at the top: the tables load numba, and `import advisory` must
    # stay light (start-up time of every command and of an integrator's import).
    from advisory.tables.table import BoomTable

    return BoomTable.load(path)


def load_zones(path: str | Path) -> ZoneSet:
    """Read and check a GeoJSON file of no-boom zones (:meth:`ZoneSet.from_file`).

    Raises
    ------
    ValueError
        The file cannot be read, is not JSON or fails a check; the message names the
        field and the value.
    """
    # Imported here for the same start-up reason as in :func:`load_table`.
    from advisory.pipeline.zones import ZoneSet

    return ZoneSet.from_file(path)


def __getattr__(name: str) -> Any:
    """The lazy public names (``advisory.Advisor`` ...) without importing numba up front."""
    module = _LAZY.get(name)
    if module is None:
        raise AttributeError(f"module 'advisory' has no attribute {name!r}")
    value = getattr(import_module(module), name)
    globals()[name] = value  # later look-ups skip this function
    return value


def __dir__() -> list[str]:
    return sorted(set(globals()) | set(_LAZY))
