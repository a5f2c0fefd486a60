"""Files written so that a crash never leaves half a file behind.

Everything is written to a temporary file in the destination folder and then
renamed over the target (``os.replace`` is atomic on POSIX and Windows).
"""

from __future__ import annotations

import contextlib
import os
import tempfile
from pathlib import Path
from typing import IO, Iterator

from livevowel.errors import UserError


@contextlib.contextmanager
def atomic_writer(path: "str | os.PathLike", *, mode: str = "w", encoding: str | None = "utf-8",
                  newline: str | None = None, permissions: int | None = None) -> Iterator[IO]:
    """Open a temporary file beside ``path``; rename it into place on success.

    On any exception the temporary file is removed and ``path`` is untouched.
    The file gets ``permissions`` (e.g. ``0o600`` for private clips), by
    default what an ordinary ``open()`` would give under the current umask.
    """
    path = Path(path)
    folder = path.parent if str(path.parent) else Path(".")
    if not folder.is_dir():
        raise UserError(f"{path}: folder {folder} does not exist; create it first")
    if "b" in mode:
        encoding = None
    try:
        fd, tmp = tempfile.mkstemp(prefix=f".{path.name}.", suffix=".part", dir=folder)
    except OSError as exc:
        raise UserError(f"{path}: cannot write here ({exc.strerror}); choose another folder") from None
    if permissions is None:
        permissions = 0o666 & ~_umask()
    try:
        os.chmod(tmp, permissions)
        with os.fdopen(fd, mode, encoding=encoding, newline=newline) as fh:
            yield fh
            fh.flush()
            os.fsync(fh.fileno())
        os.replace(tmp, path)
    except BaseException:
        with contextlib.suppress(OSError):
            os.unlink(tmp)
        raise


def _umask() -> int:
    """The process umask (read by setting and restoring it)."""
    mask = os.umask(0o022)
    os.umask(mask)
    return mask


def write_text_atomic(path: "str | os.PathLike", text: str, *, permissions: int | None = None) -> None:
    """Write ``text`` to ``path`` atomically (UTF-8; ``permissions`` as in :func:`atomic_writer`)."""
    with atomic_writer(path, permissions=permissions) as fh:
        fh.write(text)


def write_bytes_atomic(path: "str | os.PathLike", data: bytes, *, permissions: int | None = None) -> None:
    """Write ``data`` to ``path`` atomically (``permissions`` as in :func:`atomic_writer`)."""
    with atomic_writer(path, mode="wb", permissions=permissions) as fh:
        fh.write(data)


#: Modes of what holds voices and health-related data: the owner only.
PRIVATE_FILE_MODE = 0o600
PRIVATE_DIR_MODE = 0o700


def private_mkdir(folder: "str | os.PathLike") -> None:
    """``folder`` and any missing parents, each made readable by the owner only
    (:data:`PRIVATE_DIR_MODE`); folders that exist already keep their mode."""
    missing = []
    p = Path(folder)
    while not p.exists():
        missing.append(p)
        if p.parent == p:
            break
        p = p.parent
    for q in reversed(missing):
        try:
            q.mkdir(mode=PRIVATE_DIR_MODE)
        except FileExistsError:
            pass
