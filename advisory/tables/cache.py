"""A local cache of built tables, so commands without ``--table`` build once, then reuse.

The cache key is the SHA-256 of everything a table is built from (aircraft, atmosphere,
grid, reflection factor, package version); a changed input is a new entry. Location:
``$BOOM_ADVISORY_CACHE`` or ``~/.cache/boom-advisory``.
"""

from __future__ import annotations

import hashlib
import json
import os
import sys
import tempfile
import time
from pathlib import Path

from advisory.jit import writable_dir
from advisory.physics.aircraft import aircraft_document, default_aircraft, load_aircraft
from advisory.physics.atmosphere import standard_atmosphere
from advisory.schema import VERSION
from advisory.tables.build import BuildInputs, build_table_arrays, provenance
from advisory.tables.grid import default_grid
from advisory.tables.store import TableFileError, write_table_file
from advisory.tables.table import BoomTable


def cache_dir() -> Path:
    """The cache directory (created on demand).

    When ``$BOOM_ADVISORY_CACHE`` (or ``~/.cache/boom-advisory``) cannot be written, the
    user's cache and then the temporary directory are tried, with a one-line notice.

    Raises
    ------
    TableFileError
        No cache directory can be written (one line naming the first one).
    """
    env = os.environ.get("BOOM_ADVISORY_CACHE")
    user = Path.home() / ".cache" / "boom-advisory"
    first = Path(env) if env else user
    for path in (first, user, Path(tempfile.gettempdir()) / "boom-advisory"):
        if writable_dir(path):
            if path != first:
                print(f"boom-advisory: notice: table cache {first} is not writable; "
                      f"using {path}", file=sys.stderr)
            return path
    raise TableFileError(f"table cache {first}: not writable, and no fallback is "
                         "(set BOOM_ADVISORY_CACHE or pass --table)")


#: Revision of what the builder computes from the same inputs, in the key: a cached
#: table built by an earlier builder is built again (2: the carpet edge converged to
#: 1e-12 rad of the lateral cutoff azimuth, issue 14; 3: an ISA + dT day's pressure from
#: the hydrostatic equation, issue 14; 4: each ray's age and the lift map, so bank and load
#: factor reach the overpressure, issue 14; 5: the cutoff Mach's sensitivities to the air
#: below, issue 16; 7: the carpet edge's ratio quantiles, issue 16; 6 was never released:
#: development tables with fewer draws).
BUILDER_REVISION = 7


def table_key(inputs: BuildInputs) -> str:
    """SHA-256 (hex) of the build inputs and :data:`BUILDER_REVISION`."""
    doc = {
        "package_version": VERSION,
        "builder_revision": BUILDER_REVISION,
        "aircraft": aircraft_document(inputs.aircraft),
        "atmosphere": inputs.atmosphere.description,
        "grid": inputs.grid.to_dict(),
        "reflection_factor": inputs.reflection_factor,
    }
    return hashlib.sha256(json.dumps(doc, sort_keys=True).encode()).hexdigest()


def cached_table(inputs: BuildInputs, quiet: bool = False,
                 workers: int | None = None) -> BoomTable:
    """Load the table for ``inputs`` from the cache, building it first if needed.

    ``workers``: processes of the build (:func:`advisory.tables.build.build_table_arrays`;
    default all cores, 1 builds in this process, as a campaign's worker does).
    """
    path = cache_dir() / f"table-{table_key(inputs)[:24]}.boomtable"
    if path.exists():
        try:
            return BoomTable.load(path)
        except TableFileError as exc:
            if not quiet:
                print(f"boom-advisory: cached table refused ({exc}); rebuilding",
                      file=sys.stderr)
    if not quiet:
        print(f"boom-advisory: building the boom table for {inputs.aircraft.name} "
              f"(once; cached in {path.parent})", file=sys.stderr)
    t0 = time.monotonic()
    arrays = build_table_arrays(inputs, workers=workers)
    write_table_file(path, provenance(inputs, time.monotonic() - t0), arrays)
    return BoomTable.load(path)


def default_table(aircraft_file: str | None = None) -> BoomTable:
    """The default-grid table for the aircraft (the bundled demo aircraft when None) in
    the standard atmosphere, built once and cached."""
    aircraft = load_aircraft(aircraft_file) if aircraft_file else default_aircraft()
    return cached_table(BuildInputs(aircraft, standard_atmosphere(), default_grid()))
