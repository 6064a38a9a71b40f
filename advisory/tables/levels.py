"""Tables for ground above the table's own: the same aircraft, air and grid, the rays
ending at a zone's ground elevation.

A boom table is traced to one ground elevation (its grid's ``ground_elevation_m``). Where
the ground is higher the cutoff Mach is lower (in the standard atmosphere the speed of
sound falls with height, so a ray that turns back above sea level may still reach a
plateau: Snell's law, the turning height being where the sound speed equals the trace
speed), and the carpet, the arrival time and the overpressure there differ. Issue 14:
for a zone at 5,000 ft the cutoff Mach falls from 1.153 to 1.133, and at Mach 1.14-1.15
the sea-level table said "no boom" while the plateau had 1.8-2.1 psf.

A level table is built from the inputs stored in a table's header (aircraft, atmosphere,
grid, reflection factor) with the grid's ground elevation set to the level and the
altitudes kept above it by :data:`CLEARANCE_M`; it is cached like the default table
(:func:`advisory.tables.cache.cached_table`), so it is built once per level and input.
"""

from __future__ import annotations

import math
from dataclasses import replace

from advisory import units
from advisory.tables.build import BuildInputs
from advisory.tables.cache import cached_table
from advisory.tables.grid import GridError
from advisory.tables.table import BoomTable
from advisory.tables.verify import inputs_from_table

#: Lowest aircraft height kept above a level's ground in its table, m (1,000 ft; an
#: engineering choice: supersonic flight that low over high ground is outside the tables).
CLEARANCE_M = units.ft_to_m(1000.0)


def level_inputs(inputs: BuildInputs, ground_m: float) -> BuildInputs:
    """``inputs`` with the ground at ``ground_m`` (m above mean sea level) and the grid's
    altitudes kept from :data:`CLEARANCE_M` above it.

    Raises
    ------
    GridError
        Fewer than two altitude nodes of the grid lie that far above the ground (the
        message names the ground elevation and the grid's top, ft).
    """
    g = inputs.grid
    alts = tuple(a for a in g.altitudes_m if a >= ground_m + CLEARANCE_M)
    if len(alts) < 2:
        raise GridError(
            f"ground elevation {units.m_to_ft(ground_m):,.0f} ft: the table's altitudes "
            f"(up to {units.m_to_ft(g.altitudes_m[-1]):,.0f} ft) leave fewer than two "
            f"nodes {units.m_to_ft(CLEARANCE_M):,.0f} ft above it")
    grid = replace(g, altitudes_m=alts, ground_elevation_m=float(ground_m))
    grid.validate()
    return replace(inputs, grid=grid)


def level_table(table: BoomTable, ground_m: float, quiet: bool = False,
                workers: int | None = None) -> BoomTable:
    """The table for ground at ``ground_m`` made from ``table``'s inputs (built once, then
    read from the table cache; by ``workers`` processes, default all cores, 1 in this
    process); ``table`` itself when its ground is already there."""
    if math.isclose(ground_m, table.grid.ground_elevation_m, abs_tol=1e-6):
        return table
    return cached_table(level_inputs(inputs_from_table(table), ground_m), quiet=quiet,
                        workers=workers)


__all__ = ["CLEARANCE_M", "level_inputs", "level_table"]
