"""Atomic file writing: a result appears under its final name whole, or not at all.

The data is written to a temporary file beside the target, flushed and
``fsync``-ed, then renamed over the target (``os.replace`` is atomic on POSIX
and Windows within one file system). A failure or a kill leaves at most a
``.<name>.*.part`` file, never a truncated result that looks finished.
"""

from __future__ import annotations

import contextlib
import os
import tempfile


@contextlib.contextmanager
def atomic_write(path, mode="w", *, encoding="utf-8", newline=None):
    """Open a temporary file beside ``path`` for writing; on success it replaces ``path``.

    >>> import tempfile, pathlib
    >>> d = pathlib.Path(tempfile.mkdtemp())
    >>> with atomic_write(d / "x.txt") as fh:
    ...     _ = fh.write("whole")
    >>> (d / "x.txt").read_text()
    'whole'
    """
    path = os.fspath(path)
    folder = os.path.dirname(os.path.abspath(path))
    os.makedirs(folder, exist_ok=True)
    fd, tmp = tempfile.mkstemp(prefix=f".{os.path.basename(path)}.", suffix=".part", dir=folder)
    try:
        kw = {} if "b" in mode else {"encoding": encoding, "newline": newline}
        with os.fdopen(fd, mode, **kw) as fh:
            yield fh
            fh.flush()
            os.fsync(fh.fileno())
        os.replace(tmp, path)
    except BaseException:
        with contextlib.suppress(OSError):
            os.unlink(tmp)
        raise
