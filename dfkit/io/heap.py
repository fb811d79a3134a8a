"""Handing memory freed by a large read back to the operating system.

Reading a big sheet makes and drops many buffers (the file's bytes and text, the parser's chunks, per-row
working arrays). The C allocator keeps freed memory for reuse, so after a read the process may hold two or three
times what its live objects need. glibc's ``malloc_trim`` returns the free pages; with other C libraries this
does nothing. It changes no allocator setting: later allocations behave as before.
"""

from __future__ import annotations

import ctypes
import os


def release_freed_memory() -> bool:
    """Return the C allocator's free pages to the system (glibc's ``malloc_trim(0)``). Whether it ran: False where
    the C library is not glibc or cannot be reached (never an error)."""
    try:
        if not os.confstr("CS_GNU_LIBC_VERSION"):
            return False
        ctypes.CDLL("libc.so.6").malloc_trim(0)
    except (AttributeError, OSError, ValueError):
        return False
    return True
