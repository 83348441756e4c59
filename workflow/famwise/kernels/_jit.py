"""The one numba configuration of every famwise kernel.

Every kernel module imports its decorators and numba helpers from here, so
the compile options are set in one place:

- ``cache=True``: compiled code is kept on disk, a job process does not
  recompile;
- ``nogil=True``: kernels release the interpreter lock;
- ``error_model="numpy"``: division by zero gives inf or NaN as in numpy
  instead of raising (no per-division check in the loops).

``jit`` compiles a serial kernel, ``jit_inline`` one that numba inlines into
its callers, ``jit_parallel`` a kernel whose ``prange`` loops run on numba's
threads. ``JIT_DISABLED`` is True under ``NUMBA_DISABLE_JIT=1``, when the
kernels run as plain Python (slow, for debugging and for the tests of the
kernels' logic).
"""

import numba
from numba import prange, types
from numba.core import cgutils
from numba.extending import intrinsic, overload

OPTIONS = {"cache": True, "nogil": True, "error_model": "numpy"}

jit = numba.njit(**OPTIONS)
jit_inline = numba.njit(inline="always", **OPTIONS)
jit_parallel = numba.njit(parallel=True, **OPTIONS)
JIT_DISABLED = bool(numba.config.DISABLE_JIT)


def thread_count() -> int:
    """Number of threads numba's parallel kernels run on."""
    return numba.get_num_threads()


__all__ = [
    "JIT_DISABLED",
    "OPTIONS",
    "cgutils",
    "intrinsic",
    "jit",
    "jit_inline",
    "jit_parallel",
    "overload",
    "prange",
    "thread_count",
    "types",
]
