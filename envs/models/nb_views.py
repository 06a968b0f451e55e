"""numba-only helper of the compiled drivers (imported by them, never by plain Python code).

`unmanaged(a)` is a view of a contiguous array without numba's reference count. Passing arrays
to an inlined function costs numba an atomic increment and decrement per array and call; with
the eight arrays of a period function that was most of the time of a step. The drivers keep the
arrays these views point into alive for the whole call (they are its arguments).
"""
from __future__ import annotations

from typing import Any

import numba
from numba import types
from numba.core import cgutils
from numba.extending import intrinsic, register_jitable


@intrinsic
def _void_ptr(typingctx: Any, address: Any) -> Any:  # pragma: no cover - compiled
    def codegen(context: Any, builder: Any, sig: Any, args: Any) -> Any:
        return builder.inttoptr(args[0], cgutils.voidptr_t)
    return types.voidptr(address), codegen


@register_jitable
def unmanaged(a: Any) -> Any:  # pragma: no cover - compiled
    return numba.carray(_void_ptr(a.ctypes.data), a.shape, a.dtype)
