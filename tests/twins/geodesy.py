"""Plain-Python twins of the geodesy and local-frame kernels (``advisory/geo/geodesy.py``,
``advisory/geo/frame.py``): the same source, run by the interpreter.

:func:`python_twin` rebuilds a numba kernel as plain Python, rebinding every numba helper
it calls to that helper's own plain-Python twin, recursively, so no compiled code runs.
The named twins below follow the ``name_twin`` convention of :mod:`tests.twins`.
"""

from __future__ import annotations

import types
from collections.abc import Callable
from typing import Any

from advisory.geo import frame, geodesy


def python_twin(kernel: Any) -> Callable[..., Any]:
    """Plain-Python twin of a numba kernel: the same source, run by the interpreter.

    Parameters
    ----------
    kernel : numba dispatcher
        A function decorated with ``numba.njit``.

    Returns
    -------
    callable
        A plain-Python function with the same signature and results (slow).
    """
    memo: dict[int, types.FunctionType] = {}

    def build(disp: Any) -> types.FunctionType:
        key = id(disp)
        if key in memo:
            return memo[key]
        fn = disp.py_func
        g = dict(fn.__globals__)
        twin = types.FunctionType(fn.__code__, g, fn.__name__, fn.__defaults__, fn.__closure__)
        memo[key] = twin
        for name in fn.__code__.co_names:
            val = g.get(name)
            if hasattr(val, "py_func") and hasattr(val, "signatures"):
                g[name] = build(val)
        return twin

    return build(kernel)


inverse_kernel_twin = python_twin(geodesy.inverse_kernel)
direct_kernel_twin = python_twin(geodesy.direct_kernel)
inverse_bisect_point_twin = python_twin(geodesy._inverse_bisect_point)
frame_forward_kernel_twin = python_twin(frame.frame_forward_kernel)
frame_inverse_kernel_twin = python_twin(frame.frame_inverse_kernel)
