"""Keep freed memory for reuse in the processes deliverycheck owns (glibc's malloc).

Measuring a file allocates a few MB of block buffers and meter work arrays and frees them
at the end. glibc serves such sizes with fresh mmap()s, or returns the top of its heap to
the system once more than the trim threshold lies free there, so the next file faults every
page in again (and the kernel zeroes it): measured here, 880 page faults and about 4 ms of
system time per one-second file, most of a short file's fixed cost. Raising both thresholds
keeps the memory in the heap for the next file; the peak RSS does not change (it is the
high-water mark either way), only the pages stop going back and forth.

The command line and the batch workers call :func:`keep_freed_memory` at start-up;
``measure()`` called as a library changes nothing in the caller's process. Elsewhere than
glibc (no ``mallopt``) it does nothing. This module must not import numpy.
"""

from __future__ import annotations

#: mallopt parameters (glibc malloc.h) and the values set.
M_TRIM_THRESHOLD = -1
M_MMAP_THRESHOLD = -3
TRIM_THRESHOLD_BYTES = 128 << 20  # free memory kept at the heap's top
MMAP_THRESHOLD_BYTES = 32 << 20  # glibc's largest; bigger requests still get their own mmap

_done = False


def keep_freed_memory() -> bool:
    """Raise malloc's trim and mmap thresholds once per process; True when set."""
    global _done
    if _done:
        return True
    try:
        import ctypes

        mallopt = ctypes.CDLL(None).mallopt
    except (OSError, AttributeError):  # not glibc (or no C library to ask): leave it
        return False
    mallopt.argtypes = [ctypes.c_int, ctypes.c_int]
    mallopt.restype = ctypes.c_int
    _done = bool(
        mallopt(M_TRIM_THRESHOLD, TRIM_THRESHOLD_BYTES)
        and mallopt(M_MMAP_THRESHOLD, MMAP_THRESHOLD_BYTES)
    )
    return _done
