"""Readable numpy (or plain Python) twins of the package's numba kernels, used only by
the parity tests.

Convention: the twin of kernel ``name_kernel`` (or of a kernel ``name``) in
``advisory/<folder>/<module>.py`` is ``name_twin`` in ``tests/twins/<module>.py``; it takes
the same arguments and returns the same values, written for a reader rather than for
speed. A parity test compares the two on generated inputs. Twins that the package itself
uses at run time (a fallback path) are not twins and stay in the package.
"""
