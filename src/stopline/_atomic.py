"""Writing output files atomically: a temporary file in the target folder, then a rename."""

from __future__ import annotations

import os
import tempfile
from collections.abc import Callable
from pathlib import Path
from typing import IO

__all__ = ["atomic_write"]


def atomic_write(path: str | os.PathLike[str], write: Callable[[IO], None], *, binary: bool = False) -> Path:
    """Call ``write(fh)`` on a temporary file beside ``path``, then move it into place.

    A reader never sees a half-written file, and a failure leaves any earlier file intact.

    Parameters
    ----------
    path : path-like
        Destination; its folder must exist.
    write : callable
        Writes the content to the open file it is given.
    binary : bool
        Open the temporary file in binary mode (text mode, UTF-8, otherwise).
    """
    target = Path(path)
    folder = target.parent if str(target.parent) else Path(".")
    fd, tmp = tempfile.mkstemp(prefix=f".{target.name}.", suffix=".tmp", dir=folder)
    try:
        mode = "wb" if binary else "w"
        kwargs = {} if binary else {"encoding": "utf-8", "newline": ""}
        with os.fdopen(fd, mode, **kwargs) as fh:
            write(fh)
        os.chmod(tmp, 0o666 & ~_umask())  # mkstemp makes 0600; give the usual mode
        os.replace(tmp, target)
    except BaseException:
        if os.path.exists(tmp):
            os.unlink(tmp)
        raise
    return target


def _umask() -> int:
    mask = os.umask(0)
    os.umask(mask)
    return mask
