"""Atomic file writing: a result appears under its final name whole, or not at all.

The data is written to a temporary file beside the target (same folder, so the
same file system), flushed and ``fsync``-ed, then renamed over the target
(``os.replace`` is atomic on POSIX and Windows within one file system), and the
folder is ``fsync``-ed so the rename itself survives a power cut (POSIX). A
failure or a kill leaves the target as it was (absent, or the previous
version) and at most a hidden ``.<name>.*.part`` file beside it, which can be
deleted; never a truncated result that looks finished.

The new file gets the permissions of the file it replaces, or else those the
process's umask gives a new file (a bare temporary file would be private).
"""

from __future__ import annotations

import contextlib
import os
import tempfile


def _umask() -> int:
    """The process's umask, read without changing it where the system allows (Linux /proc)."""
    try:
        with open("/proc/self/status", encoding="ascii") as fh:
            for line in fh:
                if line.startswith("Umask:"):
                    return int(line.split()[1], 8)
    except (OSError, ValueError, IndexError):
        pass
    return 0o022   # the common default (an assumption where the umask cannot be read without setting it)


def _mode_for(path: str) -> int:
    try:
        return os.stat(path).st_mode & 0o7777
    except OSError:
        return 0o666 & ~_umask()


def _fsync_folder(folder: str) -> None:
    if os.name != "posix":
        return
    with contextlib.suppress(OSError):
        fd = os.open(folder, os.O_RDONLY)
        try:
            os.fsync(fd)
        finally:
            os.close(fd)


@contextlib.contextmanager
def atomic_write(path, mode="w", *, encoding="utf-8", newline=None):
    """Open a temporary file beside ``path`` for writing; on success it replaces ``path``.

    Parameters
    ----------
    path : str or os.PathLike
        The final file. Its folder is created if missing.
    mode : {'w', 'wb'}
        Text or binary.
    encoding, newline
        As for :func:`open` (text mode only).

    Raises
    ------
    OSError
        The folder cannot be written, or ``path`` is a folder. The target is left as it was.

    >>> import tempfile, pathlib
    >>> d = pathlib.Path(tempfile.mkdtemp())
    >>> with atomic_write(d / "x.txt") as fh:
    ...     _ = fh.write("whole")
    >>> (d / "x.txt").read_text()
    'whole'
    """
    kw = {} if "b" in mode else {"encoding": encoding, "newline": newline}
    with _beside(path, f".{os.path.basename(os.fspath(path))}.", ".part") as (fd, tmp):
        with os.fdopen(fd, mode, **kw) as fh:
            yield fh
            fh.flush()
            os.fsync(fh.fileno())


@contextlib.contextmanager
def atomic_path(path):
    """A temporary path beside ``path`` for writers that need a file name (GDAL, SQLite, matplotlib by name).

    The path keeps the target's extension (so a driver chosen by extension is the same). On success the file is
    ``fsync``-ed and renamed over ``path``; on failure or a kill ``path`` is left as it was.
    """
    base, ext = os.path.splitext(os.path.basename(os.fspath(path)))
    with _beside(path, f".{base}.", f".part{ext}") as (fd, tmp):
        os.close(fd)
        os.unlink(tmp)        # the writer creates the file itself
        yield tmp
        with open(tmp, "rb+") as fh:
            os.fsync(fh.fileno())


@contextlib.contextmanager
def _beside(path, prefix, suffix):
    """A new temporary file (fd, name) in the target's folder; renamed over the target when the block succeeds
    (with the target's permissions, then the folder synced), removed when it fails."""
    path = os.fspath(path)
    if os.path.isdir(path):
        raise IsADirectoryError(f"cannot write '{path}': it is a folder")
    folder = os.path.dirname(os.path.abspath(path))
    os.makedirs(folder, exist_ok=True)
    fd, tmp = tempfile.mkstemp(prefix=prefix, suffix=suffix, dir=folder)
    try:
        yield fd, tmp
        with contextlib.suppress(OSError):
            os.chmod(tmp, _mode_for(path))
        os.replace(tmp, path)
    except BaseException:
        with contextlib.suppress(OSError):
            os.unlink(tmp)
        raise
    _fsync_folder(folder)


def save_figure(fig, path, **kwargs) -> None:
    """``fig.savefig(path, **kwargs)``, atomically (the format follows the extension, as matplotlib does)."""
    ext = os.path.splitext(os.fspath(path))[1].lstrip(".").lower() or "png"
    with atomic_write(path, "wb") as fh:
        fig.savefig(fh, format=kwargs.pop("format", ext), **kwargs)
