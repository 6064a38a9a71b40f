"""The report's figures as PNG images, drawn with matplotlib when it is installed (the
optional ``report`` extra): the map of a flight and its timeline, with the ground truth
when the replay has one (as the SVG figures: where booms landed on the fixed scale
:data:`~advisory.bench.figures.TRUTH_PSF_MAX`, the truth's arrivals per zone, and in red
the spans where a boom was on its way into a zone while the status said clear or no boom).

matplotlib is optional, so every function imports it inside (the stated exception to
"imports at module top"); the package never needs it.

ADVISORY AID ONLY: not certified flight software; local regulations and licensed
practice govern supersonic flight.
"""

from __future__ import annotations

import io
import math
from typing import Any

import numpy as np

from advisory.bench.expect import Segment
from advisory.bench.figures import (
    MISSED_COLOUR,
    RAMP,
    STATUS_COLOURS,
    TRUTH_PSF_MAX,
    edge_ribbons,
    extent,
    fire_groups,
    missed_spans,
    scale_max,
    swath_quads,
    track_runs,
)
from advisory.schema import CONFLICT_STATUSES


def have_matplotlib() -> bool:
    """True when matplotlib can be imported (the optional ``report`` extra)."""
    try:
        import matplotlib  # noqa: F401  (optional dependency: only asked whether it is there)
    except ImportError:
        return False
    return True


def _png(fig: Any) -> bytes:
    # matplotlib is optional (the ``report`` extra): imported only when drawing
    from matplotlib.backends.backend_agg import FigureCanvasAgg

    FigureCanvasAgg(fig)
    buf = io.BytesIO()
    fig.savefig(buf, format="png", dpi=100)
    return buf.getvalue()


def map_png(name: str, flight: dict[str, Any], zones: list[dict[str, Any]],
            truth_fig: dict[str, Any] | None = None) -> bytes:
    """The map as a PNG image (needs matplotlib); ``truth_fig``
    (:func:`advisory.bench.replay_truth.figure_data`) adds where booms landed."""
    # matplotlib is optional (the ``report`` extra): imported only when drawing
    from matplotlib.collections import PolyCollection
    from matplotlib.colors import LinearSegmentedColormap, Normalize
    from matplotlib.figure import Figure

    lats, lons = extent(flight, zones)
    k = math.cos(math.radians(0.5 * (min(lats) + max(lats))))
    aspect = (max(lats) - min(lats)) / max((max(lons) - min(lons)) * k, 1e-6)
    if aspect >= 0.75:  # tall: fix the height, narrow the figure
        size = (min(max(7.0 / aspect + 2.6, 5.5), 10.0), 8.0)
    else:
        size = (10.0, min(max(7.4 * aspect + 1.4, 4.0), 8.0))
    fig = Figure(figsize=size)
    ax = fig.add_subplot(1, 1, 1)
    ax.set_facecolor("#eef4f8")
    cmap = LinearSegmentedColormap.from_list(
        "psf", [(f, tuple(v / 255 for v in c)) for f, c in RAMP])
    psf_all = [v for r in flight["rows"] for v in r["psf"]]
    norm = Normalize(0.0, scale_max(max(psf_all) if psf_all else 0.0))
    quads = swath_quads(flight["rows"], 1.0)
    if quads:
        pc = PolyCollection([[(lo, la) for la, lo in pts] for pts, _ in quads],
                            array=np.array([p for _, p in quads]), cmap=cmap, norm=norm,
                            linewidths=0.3, edgecolors="face")
        ax.add_collection(pc)
        fig.colorbar(pc, ax=ax, label="ground overpressure, psf", shrink=0.7, fraction=0.04)
    for i, ring in enumerate(edge_ribbons(flight)):
        ax.fill([p[1] for p in ring], [p[0] for p in ring], color="#1f3a5f", alpha=0.18,
                lw=0.6, ls="--", ec="#1f3a5f", zorder=1.2,
                label="carpet edge band (confidence)" if i == 0 else None)
    cells = (truth_fig or {}).get("cells", [])
    if cells:
        c = np.array(cells, dtype=float)
        sc = ax.scatter(c[:, 1], c[:, 0], c=np.minimum(c[:, 2], TRUTH_PSF_MAX), cmap=cmap,
                        norm=Normalize(0.0, TRUTH_PSF_MAX), marker="s", s=4, lw=0,
                        alpha=0.6, label="booms that landed (truth)", zorder=1.5)
        fig.colorbar(sc, ax=ax, label="truth, psf (fixed scale)", shrink=0.7, fraction=0.04)
    for z in zones:
        for i, ring in enumerate(z["rings"]):
            ax.fill([p[1] for p in ring], [p[0] for p in ring], color="#c0392b", alpha=0.35,
                    lw=1.2, ec="#7b241c", zorder=2, label="no-boom zone"
                    if z is zones[0] and i == 0 else None)
        ring = z["rings"][0]
        ax.annotate(z["name"], (sum(p[1] for p in ring) / len(ring),
                                sum(p[0] for p in ring) / len(ring)),
                    xytext=(6, 6), textcoords="offset points", color="#5b1a12",
                    fontweight="bold", fontsize=9)
    for ev in flight["events"]:
        if ev.get("predicted"):
            la, lo = ev["predicted"]
            ax.plot(lo, la, ls="--", lw=1.2, color=STATUS_COLOURS.get(ev["status"], "#333"))
    for i, run in enumerate(track_runs(flight["track"])):
        ax.plot([p[1] for p in run], [p[0] for p in run], color="#111", lw=1.8,
                label="track" if i == 0 else None)
    if flight["focus"]:
        f = np.array(flight["focus"])
        ax.plot(f[:, 1], f[:, 0], "D", ms=3, color="#8e24aa", label="focus", ls="none")
    first = next((r for r in flight["track"] if r[1] is not None), None)
    if first is not None:
        ax.plot(first[2], first[1], "o", ms=5, color="#111")
        ax.annotate("start", (first[2], first[1]), xytext=(6, -12), textcoords="offset points",
                    fontsize=8)
    for lat, lon, status, label, _ in fire_groups(flight["events"]):
        ax.plot(lon, lat, "o", ms=8, mec="#111", color=STATUS_COLOURS[status])
        ax.annotate(label, (lon, lat), xytext=(8, -4), textcoords="offset points", fontsize=8)
    ax.set_aspect(1.0 / k)
    ax.autoscale_view()
    ax.set_xlabel("longitude, deg")
    ax.set_ylabel("latitude, deg")
    ax.set_title(f"{name}: carpet, zones and cues", fontsize=10)
    ax.legend(loc="best", fontsize=8, framealpha=0.85)
    fig.tight_layout()
    return _png(fig)


def timeline_png(name: str, flight: dict[str, Any], segments: list[Segment],
                 truth: dict[str, Any] | None = None,
                 truth_fig: dict[str, Any] | None = None) -> bytes:
    """The timeline as a PNG image (needs matplotlib); with the replay's ``truth`` (its
    JSON form) and ``truth_fig``, a panel of the truth's arrivals per zone and the missed
    spans in red under the level band."""
    # matplotlib is optional (the ``report`` extra): imported only when drawing
    from matplotlib.figure import Figure
    from matplotlib.patches import Patch

    tr = flight["track"]

    def col(i: int) -> np.ndarray:
        return np.array([np.nan if r[i] is None else r[i] for r in tr], dtype=float)

    t = col(0)
    with_truth = truth is not None
    ratios = [3, 2, 2, 1] if with_truth else [3, 2, 1]
    fig = Figure(figsize=(9, 6.8 if with_truth else 5.2))
    axes = fig.subplots(len(ratios), 1, sharex=True, gridspec_kw={"height_ratios": ratios})
    if with_truth:
        _truth_panel(axes[2], truth or {}, truth_fig or {})
        axes = [axes[0], axes[1], axes[3]]
    axes[0].plot(t, col(4), color="#1f4e79", label="Mach")
    axes[0].plot(t, col(5), color="#c0392b", ls="--", label="cutoff Mach")
    axes[0].set_ylabel("Mach")
    axes[0].legend(loc="best", fontsize=8)
    axes[1].plot(t, col(3), color="#2e7d32")
    axes[1].set_ylabel("altitude, ft")
    for s in segments:
        axes[2].axvspan(s.t_start_s, max(s.t_end_s, s.t_start_s + 0.1),
                        color=STATUS_COLOURS.get(s.status, "#999"))
        if s.status in CONFLICT_STATUSES:
            for ax in axes[:2]:
                ax.axvline(s.t_start_s, color=STATUS_COLOURS[s.status], ls=":", lw=1)
    axes[2].set_yticks([])
    axes[2].set_ylabel("level")
    for a, b, _zid in missed_spans(truth):
        axes[2].axvspan(a, max(b, a + 0.5), ymin=0.0, ymax=0.35, color=MISSED_COLOUR)
    axes[2].set_xlabel("time after the first input, s")
    handles = [Patch(color=STATUS_COLOURS[k], label=k) for k in STATUS_COLOURS
               if any(s.status == k for s in segments)]
    if handles:
        axes[2].legend(handles=handles, loc="upper center", ncol=len(handles), fontsize=7,
                       bbox_to_anchor=(0.5, -0.9))
    axes[0].set_title(f"{name}: Mach, altitude and advisory level"
                      + ("; red: missed (truth)" if with_truth else ""))
    fig.tight_layout()
    return _png(fig)




def _truth_panel(ax: Any, truth: dict[str, Any], truth_fig: dict[str, Any]) -> None:
    """The truth's arrivals at each zone: overpressure (psf, fixed scale) against time."""
    arrivals = truth_fig.get("arrivals", {})
    for e in truth.get("exposures", []):
        pts = np.array(arrivals.get(e["zone_id"], []), dtype=float).reshape(-1, 3)
        if pts.size:
            ax.plot(pts[:, 0], np.minimum(pts[:, 1], TRUTH_PSF_MAX), ".", ms=3,
                    label=f"{e['zone_id']} (truth)")
    ax.set_ylim(0.0, TRUTH_PSF_MAX)
    ax.set_ylabel("truth, psf")
    if truth.get("exposures"):
        ax.legend(loc="upper right", fontsize=7)
    else:
        ax.text(0.5, 0.5, "no boom reached a zone (truth)", transform=ax.transAxes,
                ha="center", va="center", fontsize=8, color="#555")
