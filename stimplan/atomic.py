"""Atomic creation of output folders and files.

Everything is written into a temporary sibling and renamed into place at the
end, so an interrupted write leaves nothing that looks complete. Nothing is
replaced without an explicit ``force``.
"""

from __future__ import annotations

import contextlib
import os
import shutil
import tempfile
from collections.abc import Iterator
from pathlib import Path

from .errors import ExportError

__all__ = ["atomic_folder", "atomic_file"]


def _umask() -> int:
    mask = os.umask(0)
    os.umask(mask)
    return mask


@contextlib.contextmanager
def atomic_folder(target: str | Path, *, force: bool = False) -> Iterator[Path]:
    """Yield a temporary folder that becomes ``target`` when the block succeeds.

    Parameters
    ----------
    target : path
        Final folder.
    force : bool
        Replace an existing ``target``.

    Raises
    ------
    ExportError
        If ``target`` exists and ``force`` is false.
    """
    dst = Path(target).absolute()
    if dst.exists() and not force:
        raise ExportError(
            "output", str(dst), "a path that does not exist yet", "pass --force to replace it"
        )
    dst.parent.mkdir(parents=True, exist_ok=True)
    tmp = Path(tempfile.mkdtemp(prefix=f".{dst.name}.partial-", dir=dst.parent))
    os.chmod(tmp, 0o777 & ~_umask())  # mkdtemp makes 0700; give the usual permissions
    try:
        yield tmp
        if dst.exists():
            old = dst.with_name(f".{dst.name}.old-{os.getpid()}")
            os.replace(dst, old)
            os.replace(tmp, dst)
            shutil.rmtree(old, ignore_errors=True)
        else:
            os.replace(tmp, dst)
    except BaseException:
        shutil.rmtree(tmp, ignore_errors=True)
        raise


@contextlib.contextmanager
def atomic_file(target: str | Path, *, force: bool = False, mode: str = "wb") -> Iterator:
    """Open a temporary sibling of ``target`` for writing; rename it into place on success."""
    dst = Path(target).absolute()
    if dst.exists() and not force:
        raise ExportError(
            "output", str(dst), "a path that does not exist yet", "pass --force to replace it"
        )
    dst.parent.mkdir(parents=True, exist_ok=True)
    fd, name = tempfile.mkstemp(prefix=f".{dst.name}.partial-", dir=dst.parent)
    os.chmod(name, 0o666 & ~_umask())  # mkstemp makes 0600
    try:
        with os.fdopen(fd, mode) as fh:
            yield fh
            fh.flush()
            os.fsync(fh.fileno())
        os.replace(name, dst)
    except BaseException:
        with contextlib.suppress(FileNotFoundError):
            os.unlink(name)
        raise
