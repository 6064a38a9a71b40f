"""Whether a flight condition lies inside the live table (issue 14, item 5).

The table lookup (:func:`advisory.tables.lookup.lookup_kernel`) uses the nearest edge
value outside the table's altitude, flight-path-angle and Mach-excess ranges. At the
edge that is a fair stand-in; far beyond it, it is wrong in the direction that matters:
at 8,000 ft under a table starting at 20,000 ft the cutoff Mach read at the edge was
1.077 where direct tracing gives 1.029, and the advisor said "no boom" at Mach 1.05 where
a 5.2 psf boom reaches the ground. The advisor therefore never predicts from a present
state outside the table: it says ``unavailable`` with the reason
(:func:`outside_table`), whose crew cue reads "outside table".

Tolerances beyond the edge (project choice): :data:`ALT_TOLERANCE_M` (the air data's
altitude noise; the default table's altitude nodes are 500 ft apart, so 100 ft beyond
the edge reads the last cell's slope over a fifth of a cell) and
:data:`FPA_TOLERANCE_RAD` (half a degree: a 5-deg dive changes the overpressure by
about 3 % against level flight, so half a degree by about 0.3 %).

ADVISORY AID ONLY: not certified flight software; local regulations and licensed
practice govern supersonic flight.
"""

from __future__ import annotations

import math
from typing import TYPE_CHECKING

from advisory import units

if TYPE_CHECKING:  # annotations only: the start-up's cues import this module before numba
    from advisory.tables.table import BoomTable

__all__ = ["ALT_TOLERANCE_M", "FPA_TOLERANCE_RAD", "OUTSIDE_TABLE", "outside_table",
           "mach_outside_table", "table_range_text", "table_range_tag"]

ALT_TOLERANCE_M = 30.0  #: altitude beyond the table's range still read at its edge, m
FPA_TOLERANCE_RAD = math.radians(0.5)  #: flight-path angle likewise, rad
#: How every reason given for a condition outside the table starts.
OUTSIDE_TABLE = "outside the table"


def _ranges(table: BoomTable) -> tuple[float, float, float, float]:
    """Lowest and highest altitude (ft) and flight-path angle (deg) of ``table``."""
    a0, a1 = (units.m_to_ft(float(table.ax_alt[i])) for i in (0, -1))
    f0, f1 = (math.degrees(float(table.ax_fpa[i])) for i in (0, -1))
    return a0, a1, f0, f1


def table_range_text(table: BoomTable) -> str:
    """The table's altitude and flight-path-angle ranges in words (ft, deg)."""
    a0, a1, f0, f1 = _ranges(table)
    fpa = f"{f0:g} deg" if f0 == f1 else f"{f0:g} to {f1:g} deg"
    return f"table {a0:,.0f}-{a1:,.0f} ft, flight-path angle {fpa}"


def table_range_tag(table: BoomTable) -> str:
    """The table's range in at most 31 ASCII characters, for the status frame's
    ``table_range`` key (``docs/interface.md`` section 6): altitudes (ft), flight-path
    angles (whole deg) and the largest Mach excess over cutoff, e.g.
    ``5000-65000ft -10..10deg +2.00M``."""
    a0, a1, f0, f1 = _ranges(table)
    fpa = f"{f0:.0f}deg" if round(f0) == round(f1) else f"{f0:.0f}..{f1:.0f}deg"
    return f"{a0:.0f}-{a1:.0f}ft {fpa} +{float(table.ax_mex[-1]):.2f}M"[:31]


def outside_table(table: BoomTable, alt_m: float, fpa_rad: float) -> str | None:
    """The reason (one line) when geometric height ``alt_m`` (m) or flight-path angle
    ``fpa_rad`` (rad) lies outside ``table`` beyond the tolerances, else None."""
    lo, hi = float(table.ax_alt[0]), float(table.ax_alt[-1])
    if not lo - ALT_TOLERANCE_M <= alt_m <= hi + ALT_TOLERANCE_M:
        return (f"{OUTSIDE_TABLE}: height {units.m_to_ft(alt_m):,.0f} ft "
                f"({table_range_text(table)})")
    f_lo, f_hi = float(table.ax_fpa[0]), float(table.ax_fpa[-1])
    if not f_lo - FPA_TOLERANCE_RAD <= fpa_rad <= f_hi + FPA_TOLERANCE_RAD:
        return (f"{OUTSIDE_TABLE}: flight-path angle {math.degrees(fpa_rad):.1f} deg "
                f"({table_range_text(table)})")
    return None


def mach_outside_table(table: BoomTable, mach: float, cutoff_mach: float) -> str | None:
    """The reason when ``mach`` lies beyond the table's highest Mach excess over
    ``cutoff_mach`` (the cutoff Mach of the present condition), else None."""
    top = cutoff_mach + float(table.ax_mex[-1])
    if mach > top + 1e-9:
        return f"{OUTSIDE_TABLE}: Mach {mach:.2f} above the table's {top:.2f} here"
    return None
