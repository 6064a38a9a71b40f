"""A loaded boom table: provenance, arrays and the fast footprint lookup."""

from __future__ import annotations

import math
import time
from dataclasses import dataclass
from pathlib import Path

import numpy as np

from advisory import units
from advisory.physics.atmosphere import Atmosphere, atmosphere_from_description
from advisory.tables import lookup as lk
from advisory.tables.grid import TableGrid
from advisory.tables.store import (
    TableFileError,
    atmosphere_from_arrays,
    read_table_file,
    write_table_file,
)

_REQUIRED = ("axis_altitude_m", "axis_mach_excess", "axis_fpa_rad", "axis_heading_rad",
             "axis_eta", "cutoff_mach", "phi_left", "phi_right", "cells")


@dataclass
class Footprint:
    """One interpolated footprint (one emission point, every tabulated azimuth).

    Attributes
    ----------
    code : int
        :data:`advisory.tables.lookup.NO_BOOM`, ``OK`` or ``CLAMPED``.
    cutoff_mach : float
        Interpolated cutoff Mach for the condition.
    rows : ndarray, shape (n_eta, N_QUANTITIES)
        Per azimuth: the ``Q_*`` quantities of :mod:`advisory.tables.lookup`.
    """

    code: int
    cutoff_mach: float
    rows: np.ndarray

    @property
    def reaches_ground(self) -> bool:
        """True when the boom reaches the ground."""
        return self.code != lk.NO_BOOM


class BoomTable:
    """A boom table in memory.

    Use :meth:`load` for a file, or the constructor with a header and arrays after a
    build (:attr:`path` is then None).
    """

    def __init__(self, header: dict, arrays: dict[str, np.ndarray]) -> None:
        missing = [k for k in _REQUIRED if k not in arrays]
        if missing:
            raise TableFileError(f"table: missing arrays {missing}")
        self.header = header
        self.arrays = arrays
        self.grid = TableGrid.from_dict(header["grid"])
        self.ax_alt = np.ascontiguousarray(arrays["axis_altitude_m"], dtype=np.float64)
        self.ax_mex = np.ascontiguousarray(arrays["axis_mach_excess"], dtype=np.float64)
        self.ax_fpa = np.ascontiguousarray(arrays["axis_fpa_rad"], dtype=np.float64)
        self.ax_hdg = np.ascontiguousarray(arrays["axis_heading_rad"], dtype=np.float64)
        self.eta = np.ascontiguousarray(arrays["axis_eta"], dtype=np.float64)
        self.cutoff = np.ascontiguousarray(arrays["cutoff_mach"], dtype=np.float64)
        self.cells = np.ascontiguousarray(arrays["cells"], dtype=np.float64)
        self.loaded_monotonic = time.monotonic()
        #: The file the table was loaded from (None for a table built in memory).
        self.path: str | None = None

    # ---- I/O ---------------------------------------------------------------------------
    @classmethod
    def load(cls, path: str | Path) -> BoomTable:
        """Load and check a table file (see :mod:`advisory.tables.store`)."""
        header, arrays = read_table_file(path)
        if header.get("kind") != "boom-advisory table":
            raise TableFileError(f"table file {path}: header kind is not a boom table")
        table = cls(header, arrays)
        table.path = str(path)
        return table

    def save(self, path: str | Path) -> str:
        """Write the table atomically; returns the payload SHA-256."""
        header = {k: v for k, v in self.header.items()
                  if k not in ("arrays", "payload_sha256", "payload_nbytes", "format_version")}
        digest = write_table_file(path, header, self.arrays)
        self.header["payload_sha256"] = digest
        return digest

    def atmosphere(self) -> Atmosphere:
        """The atmosphere the table was built from (from the payload, in full; from the
        header's description for a table without the atmosphere arrays)."""
        if "atm_z_m" in self.arrays:
            return atmosphere_from_arrays(self.arrays, self.header.get("atmosphere", {}))
        return atmosphere_from_description(self.header["atmosphere"])

    @property
    def digest(self) -> str:
        """Payload SHA-256 (hex), or '' for a table not yet saved."""
        return str(self.header.get("payload_sha256", ""))

    @property
    def has_wind(self) -> bool:
        """True when the table was built with a heading axis (windy atmosphere)."""
        return self.ax_hdg.size > 1

    # ---- lookup ------------------------------------------------------------------------
    def footprint_into(self, out: np.ndarray, altitude_m: float, mach: float, fpa_rad: float,
                       heading_rad: float) -> tuple[int, float]:
        """Fill ``out`` (n_eta, N_QUANTITIES) for one emission point; returns (code, cutoff).

        The hot-path call: no allocation.
        """
        return lk.lookup_kernel(altitude_m, mach, fpa_rad, heading_rad, self.ax_alt, self.ax_mex,
                                self.ax_fpa, self.ax_hdg, self.cutoff, self.cells, out)

    def footprint(self, altitude_m: float, mach: float, fpa_rad: float = 0.0,
                  heading_rad: float = 0.0) -> Footprint:
        """Interpolated footprint for one emission point (allocates its result)."""
        out = np.zeros((self.eta.size, lk.N_QUANTITIES))
        if not (math.isfinite(altitude_m) and math.isfinite(mach) and math.isfinite(fpa_rad)
                and math.isfinite(heading_rad)):
            return Footprint(lk.NO_BOOM, math.nan, out)
        code, mcut = self.footprint_into(out, altitude_m, mach, fpa_rad, heading_rad)
        return Footprint(int(code), float(mcut), out)

    def cutoff_mach(self, altitude_m: float, fpa_rad: float = 0.0,
                    heading_rad: float = 0.0) -> float:
        """Interpolated cutoff Mach."""
        out = np.zeros((self.eta.size, lk.N_QUANTITIES))
        _, mcut = self.footprint_into(out, altitude_m, 0.0, fpa_rad, heading_rad)
        return float(mcut)

    def info_lines(self) -> list[str]:
        """Human-readable provenance."""
        h = self.header
        g = self.grid
        alts_ft = [units.m_to_ft(a) for a in g.altitudes_m]
        atm = h.get("atmosphere", {})
        ac = h.get("aircraft", {})
        lines = [
            f"table format version {h.get('format_version')}, built by boom-advisory "
            f"{h.get('package_version')} at {h.get('build_utc')} "
            f"in {h.get('build_seconds')} s",
            f"payload SHA-256 {h.get('payload_sha256')} ({h.get('payload_nbytes')} bytes)",
            f"aircraft: {ac.get('name', '?')} (length {ac.get('length_m')} m, "
            f"mass {ac.get('mass_kg')} kg)",
            f"atmosphere: {atm.get('kind')} offset {atm.get('temp_offset_k', 0.0):+.1f} K"
            + (f", {len(atm.get('levels', []))} levels from {atm.get('source')}"
               if atm.get("kind") == "profile" else ""),
            f"reflection factor {h.get('reflection_factor')}",
            f"grid: altitude {alts_ft[0]:,.0f}-{alts_ft[-1]:,.0f} ft ({len(alts_ft)} nodes), "
            f"Mach excess {g.mach_excess[0]}-{g.mach_excess[-1]} ({len(g.mach_excess)}), "
            f"Mach max {g.mach_max}, flight-path angle "
            f"{math.degrees(g.fpa_rad[0]):.1f}..{math.degrees(g.fpa_rad[-1]):.1f} deg "
            f"({len(g.fpa_rad)}), headings {len(g.headings_rad)}, azimuths {g.n_eta}, "
            f"ground {units.m_to_ft(g.ground_elevation_m):,.0f} ft",
        ]
        return lines
