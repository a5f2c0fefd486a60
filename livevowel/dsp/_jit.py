"""Compiled per-frame loops for the streaming hot path (numba).

The live path measures one 10 ms frame at a time, on arrays of a few dozen
to a few hundred elements. There numpy's per-call overhead (a few
microseconds) dominates: a frame took about 300 numpy calls. The loops of
the per-frame measures are compiled with numba instead; the batched paths
call the same kernels frame by frame, so live, file and demo input run one
implementation.

``jit`` compiles on first use and caches the machine code beside the
module (or in numba's user cache when that folder is read-only), so the
compile cost (a few seconds) is paid once per installation, not per run.
``fastmath`` stays off: results must not depend on reassociation, so that
a stream split into any blocks gives the same numbers as the whole file.
"""

from __future__ import annotations

from typing import Callable, TypeVar

import numba

F = TypeVar("F", bound=Callable)


def jit(fn: F) -> F:
    """``numba.njit`` with the project's options (cached, no GIL, IEEE arithmetic)."""
    return numba.njit(cache=True, nogil=True, fastmath=False, error_model="numpy")(fn)
