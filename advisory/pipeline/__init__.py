"""The aircraft-side pipeline, one cycle: validated state, trajectory ahead, footprint
from the tables, zones, conflicts, levels, resolutions, and the advisor that runs them."""
