"""One place that imports numba, so the cache location is settled first.

numba's ``cache=True`` writes next to the source by default. When that folder
is read-only (an installed wheel, a container) numba refuses to import the
module, so fall back to a per-user cache folder before numba is imported.
"""

from __future__ import annotations

import os
import tempfile

if not os.environ.get("NUMBA_CACHE_DIR"):
    _here = os.path.dirname(os.path.abspath(__file__))
    if not os.access(_here, os.W_OK):
        _fallback = os.path.join(
            os.environ.get("XDG_CACHE_HOME") or os.path.join(tempfile.gettempdir()),
            "cycleledger-numba")
        os.makedirs(_fallback, exist_ok=True)
        os.environ["NUMBA_CACHE_DIR"] = _fallback

from llvmlite import ir  # noqa: E402
from numba import njit, types  # noqa: E402  (must follow the cache-dir guard)
from numba.core import cgutils  # noqa: E402
from numba.extending import intrinsic  # noqa: E402

#: Decorator for every compiled kernel: cached on disk, releases the GIL.
kernel = njit(cache=True, nogil=True)

# For loops that must vectorise: numpy's error model (numba's default checks
# divisions for zero, which blocks vectorising) and fastmath without
# nnan/ninf (infinite ranges mark static overloads and must survive). No
# "contract": a fused multiply-add rounds once where numpy rounds twice,
# and at an exact zero (a peak of 0 MPa, the edge of Walker and SWT) that
# turned "no damage" into 1e-39 (found by the compiled == numpy property).
simd = njit(cache=True, nogil=True, error_model="numpy", fastmath={"reassoc", "nsz"})


@intrinsic
def prefetch(typingctx, array, index):
    """Hint the processor to fetch ``array[index]`` into the cache.

    For gathers whose indices are known well ahead (the stack pass reads
    ``x[code]`` for turning points that lie tens of samples apart, so the
    hardware prefetcher cannot follow). A hint only: it changes no value and
    never faults, but ``index`` must lie inside the array all the same.
    """
    sig = types.void(array, index)

    def codegen(context, builder, signature, args):
        arrty = signature.args[0]
        arr = context.make_array(arrty)(context, builder, args[0])
        ptr = cgutils.get_item_pointer(context, builder, arrty, arr, [args[1]],
                                       wraparound=False)
        i32 = ir.IntType(32)
        fn = cgutils.get_or_insert_function(
            builder.module, ir.FunctionType(ir.VoidType(), [ptr.type, i32, i32, i32]),
            "llvm.prefetch.p0")
        # read, keep in all cache levels, data cache
        builder.call(fn, [ptr, i32(0), i32(3), i32(1)])
        return context.get_dummy_value()

    return sig, codegen


__all__ = ["kernel", "njit", "prefetch", "simd"]
