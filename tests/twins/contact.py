"""numpy twin of the edge-chunk kernel (``advisory/geo/contact.py``): the plain loop over
rings and chunks with numpy's own min / max of each chunk's vertices.
"""

from __future__ import annotations

import numpy as np


def edge_chunks_twin(x, y, ring_start, chunk_size):
    """numpy twin of :func:`advisory.geo.contact.build_edge_chunks` /
    ``edge_chunks_kernel``: (ring_chunk, chunk_edges, chunk_bbox)."""
    starts, ends, ring_chunk = [], [], [0]
    for r in range(len(ring_start) - 1):
        e0, e1 = int(ring_start[r]), int(ring_start[r + 1]) - 1
        for c0 in range(e0, e1, chunk_size):
            starts.append(c0)
            ends.append(min(c0 + chunk_size, e1))
        ring_chunk.append(len(starts))
    edges = np.array([starts, ends], dtype=np.int64).T.reshape(-1, 2)
    bbox = np.array([(x[a:b + 1].min(), y[a:b + 1].min(), x[a:b + 1].max(), y[a:b + 1].max())
                     for a, b in zip(starts, ends, strict=True)]).reshape(-1, 4)
    return np.asarray(ring_chunk, dtype=np.int64), edges, bbox
