"""The compiler settings of the coverage kernel (one place for all its numba functions).

``error_model="numpy"``: a float division by zero gives inf or nan instead of raising (the
kernel never relies on the exception). Besides removing a test per division, this keeps the
control flow simple enough for numba's reference-count pruning: with the default ("python")
error model the raise paths defeat it, and every array handed to an inlined helper then
costs atomic reference-count updates on each call, several times the cost of the helper
(measured on the event pushes: 28 ns against 7 ns each). ``inline="always"`` inlines at
numba IR level, so small helpers cost no call. ``_nrt=False`` compiles without numba's
reference-counting runtime (an option numba accepts but its type stubs do not list, hence
the ``type: ignore``): the kernel allocates no arrays, so it needs none.
"""

from __future__ import annotations

import numba

__all__ = ["kernel_function", "kernel_helper"]

#: A compiled kernel function (cached on disk, releases the GIL).
kernel_function = numba.njit(cache=True, nogil=True, error_model="numpy",  # type: ignore[call-overload]
                             _nrt=False)
#: A compiled helper inlined into its callers.
kernel_helper = numba.njit(cache=True, nogil=True, error_model="numpy",  # type: ignore[call-overload]
                           inline="always", _nrt=False)
