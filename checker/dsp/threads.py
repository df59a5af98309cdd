"""One thread per process for the numeric libraries' own thread pools.

deliverycheck decides its own parallelism: ``--jobs`` worker processes and, for a lone file,
the read-ahead thread. The BLAS that numpy loads (OpenBLAS in the wheels) would otherwise
split every matrix product (true peak's polyphase product) across its own threads as well;
where it runs its Haswell kernel this more than doubled the CPU for the same result and, on a
loaded machine, made a ``--jobs 1`` batch 31 times slower (see README, Speed). So:

- processes deliverycheck owns (the command line, its worker processes) call
  ``claim_process()``: the pool variables are set to 1, so libraries loaded later and child
  processes (the forkserver, Dask's local workers) start with one thread, and the pools
  already loaded are limited through threadpoolctl;
- ``measure()`` and ``check()`` called as a library run inside ``one_thread_pools()``, which
  limits the loaded pools for the duration of the call and restores the caller's settings
  afterwards; importing ``checker`` changes nothing in the caller's process.

This module must not import numpy (it runs before numpy where it can).
"""

from __future__ import annotations

import contextlib
import os
import sys
from collections.abc import Iterator

#: Variables the common pools read when their library is loaded.
POOL_ENV = (
    "OPENBLAS_NUM_THREADS",
    "OMP_NUM_THREADS",
    "MKL_NUM_THREADS",
    "BLIS_NUM_THREADS",
    "VECLIB_MAXIMUM_THREADS",
    "NUMEXPR_NUM_THREADS",
)

_controller = None  # threadpoolctl.ThreadpoolController, built once per process
_claimed = False


def _pool_controller():
    """The process's threadpoolctl controller (None without threadpoolctl). Built once, after
    numpy is loaded; rebuilt if new pool libraries appeared since (a later scipy.linalg)."""
    global _controller
    try:
        from threadpoolctl import ThreadpoolController
    except ImportError:  # pragma: no cover - a declared dependency; env variables still apply
        return None
    if _controller is None or _loaded_count() != _controller_count:
        _set_controller(ThreadpoolController())
    return _controller


_controller_count = -1


def _loaded_count() -> int:
    """How many modules are loaded: a cheap hint that new shared libraries may have come."""
    return len(sys.modules)


def _set_controller(controller) -> None:
    global _controller, _controller_count
    _controller = controller
    _controller_count = _loaded_count()


def claim_process() -> None:
    """For a process deliverycheck owns: every library pool runs one thread, now and in
    libraries and child processes started later. Idempotent and cheap after the first call."""
    global _claimed
    for name in POOL_ENV:
        os.environ[name] = "1"
    if _claimed and _controller is not None and _loaded_count() == _controller_count:
        return
    _claimed = True
    if "numpy" in sys.modules:  # loaded already: its pool may have started its threads
        controller = _pool_controller()
        if controller is not None:
            controller.limit(limits=1)  # for the rest of the process


def pool_threads() -> int:
    """The largest thread count among the pools loaded in this process (1 when none)."""
    controller = _pool_controller()
    if controller is None:  # pragma: no cover
        return 1
    return max([lib.num_threads for lib in controller.lib_controllers] or [1])


@contextlib.contextmanager
def one_thread_pools() -> Iterator[None]:
    """Run the body with every loaded pool at one thread; the caller's settings come back
    afterwards. Costs a few microseconds when the pools already run one thread."""
    controller = _pool_controller()
    if controller is None or all(lib.num_threads == 1 for lib in controller.lib_controllers):
        yield
        return
    with controller.limit(limits=1):
        yield
