"""Compiled per-frame loops for the streaming hot path (numba).

The live path measures one 10 ms frame at a time, on arrays of a few dozen
to a few hundred elements. There numpy's per-call overhead (a few
microseconds) dominates: a frame took about 300 numpy calls. The loops of
the per-frame measures are compiled with numba instead; the batched paths
call the same kernels frame by frame, so live, file and demo input run one
implementation.

``jit`` compiles on first use and caches the machine code on disk, in a
folder keyed on a hash of all of ``livevowel/dsp`` (see
:data:`CACHE_DIR`), so the compile cost (about half a minute for all
kernels) is paid once per installation and version, not per run. With no
writable folder the kernels still run, compiled afresh in each process.
Rules for kernels: a kernel may call kernels and read constants of any
module (the hash covers them all), but module constants are frozen into the
machine code, so changing them at run time has no effect.
``fastmath`` stays off: results must not depend on reassociation, so that
a stream split into any blocks gives the same numbers as the whole file.
"""

from __future__ import annotations

import hashlib
import os
import sys
import tempfile
from pathlib import Path
from typing import Callable, TypeVar

import numba

F = TypeVar("F", bound=Callable)

#: Every kernel made by :func:`jit`, in definition order.
KERNELS: list = []

#: Environment variable naming the folder for compiled kernels (else the user cache folder).
CACHE_ENV = "LIVEVOWEL_KERNEL_CACHE"


def _source_key() -> str:
    """Hash of every module in ``livevowel/dsp`` plus the numba and Python versions.

    numba checks only the timestamp of the file that defines a kernel, so a
    kernel calling into another module, or reading a constant from it, would
    keep stale machine code after that module changed. Keying the whole cache
    folder on all the sources makes any change start a fresh folder.
    """
    h = hashlib.sha256(f"{numba.__version__} {sys.version}".encode())
    for path in sorted(Path(__file__).parent.glob("*.py")):
        h.update(path.name.encode())
        h.update(path.read_bytes())
    return h.hexdigest()[:16]


def _writable(folder: Path) -> bool:
    try:
        folder.mkdir(parents=True, exist_ok=True)
        probe = folder / f".probe-{os.getpid()}"
        probe.write_bytes(b"")
        probe.unlink()
        return True
    except OSError:
        return False


def _cache_dir() -> str | None:
    """First writable of: $LIVEVOWEL_KERNEL_CACHE, the user cache folder, the temp folder; None if none is."""
    bases = [os.environ.get(CACHE_ENV)]
    try:
        from platformdirs import user_cache_dir

        bases.append(user_cache_dir("livevowel"))
    except ImportError:                       # platformdirs is a dependency; be safe anyway
        pass
    bases.append(os.path.join(tempfile.gettempdir(), f"livevowel-{os.getuid() if hasattr(os, 'getuid') else 'user'}"))
    key = _source_key()
    for base in bases:
        if base and _writable(Path(base) / f"kernels-{key}"):
            return str(Path(base) / f"kernels-{key}")
    return None


#: Folder holding the compiled kernels of this version of the sources (None: not cached).
CACHE_DIR: str | None = _cache_dir()


def jit(fn: F) -> F:
    """``numba.njit`` with the project's options (cached in :data:`CACHE_DIR`, no GIL, IEEE arithmetic)."""
    cache = CACHE_DIR is not None
    saved = numba.config.CACHE_DIR
    try:
        if cache:
            numba.config.CACHE_DIR = CACHE_DIR   # read once, when the kernel's cache is set up
        disp = numba.njit(cache=cache, nogil=True, fastmath=False, error_model="numpy")(fn)
    finally:
        numba.config.CACHE_DIR = saved
    KERNELS.append(disp)
    return disp


def kernels_cached() -> bool:
    """Whether every kernel has a compiled copy on disk (so the first analysis starts at once).

    False when nothing can be cached. Reads numba's cache index paths; with
    the JIT disabled (``NUMBA_DISABLE_JIT=1``) there is nothing to compile
    and the answer is True.
    """
    if numba.config.DISABLE_JIT:
        return True
    if CACHE_DIR is None:
        return False
    try:
        return all(os.path.exists(k._cache._cache_file._index_path) for k in KERNELS)
    except AttributeError:
        return False
