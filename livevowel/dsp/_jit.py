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

import os
from typing import Callable, TypeVar

import numba

F = TypeVar("F", bound=Callable)

#: Every kernel made by :func:`jit`, in definition order.
KERNELS: list = []


def jit(fn: F) -> F:
    """``numba.njit`` with the project's options (cached, no GIL, IEEE arithmetic)."""
    disp = numba.njit(cache=True, nogil=True, fastmath=False, error_model="numpy")(fn)
    KERNELS.append(disp)
    return disp


def kernels_cached() -> bool:
    """Whether every kernel has a compiled copy on disk (so the first analysis starts at once).

    Reads numba's cache index paths; if numba's internals ever change shape,
    answers True (the only cost is a missing "compiling" note).
    """
    try:
        return all(os.path.exists(k._cache._cache_file._index_path) for k in KERNELS)
    except AttributeError:
        return True
