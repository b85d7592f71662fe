"""Atomic output files: write a temporary file beside the target, then rename."""

from __future__ import annotations

import contextlib
import os
import tempfile
from collections.abc import Iterator
from pathlib import Path

from .errors import OutputExistsError

__all__ = ["atomic_path", "check_writable"]


def check_writable(path: os.PathLike | str, force: bool) -> Path:
    """Refuse an existing output unless ``force``; return the path."""
    path = Path(path)
    if path.exists() and not force:
        raise OutputExistsError(f"{path}: exists already and was not replaced")
    if path.is_dir():
        raise OutputExistsError(f"{path}: is a directory, not an output file")
    return path


@contextlib.contextmanager
def atomic_path(path: os.PathLike | str, force: bool = False) -> Iterator[Path]:
    """Yield a temporary path in the target's folder; rename it onto ``path`` on success.

    If the block raises, the temporary file is removed and ``path`` is untouched.
    """
    path = check_writable(path, force)
    path.parent.mkdir(parents=True, exist_ok=True)
    fd, tmp = tempfile.mkstemp(prefix=f".{path.name}.", suffix=".part", dir=path.parent)
    os.close(fd)
    tmp_path = Path(tmp)
    umask = os.umask(0)
    os.umask(umask)
    os.chmod(tmp_path, 0o666 & ~umask)  # mkstemp makes 0600; outputs get ordinary permissions
    try:
        yield tmp_path
        if not force and path.exists():
            raise OutputExistsError(f"{path}: output appeared while writing; not overwritten")
        os.replace(tmp_path, path)
    finally:
        with contextlib.suppress(FileNotFoundError):
            tmp_path.unlink()
