"""Subnormal numbers flushed to zero inside the compiled loops.

Far from a disturbance, a large system's displacements decay to magnitudes whose
squares (in the energy rates) fall below 2.2·10⁻³⁰⁸ and become subnormal; on x86
every operation on a subnormal takes some hundred cycles. Measured on a
100 000-body chain with a local disturbance, the element post-processing ran three
times slower on the run's own data than on random data of the same shape. The
stepping kernels therefore set the processor's flush-to-zero and
denormals-are-zero modes on entry and restore the caller's mode before they return:
values below 2.2·10⁻³⁰⁸ become 0, nothing else changes.

On processors other than x86 the two functions do nothing.
"""

from __future__ import annotations

import platform

from llvmlite import ir
from numba import types
from numba.core import cgutils
from numba.extending import intrinsic

__all__ = ["flush_subnormals", "restore_float_mode"]

_X86 = platform.machine().lower() in ("x86_64", "amd64", "i386", "i686", "x86")
#: MXCSR bits: flush to zero (15) and denormals are zero (6).
_FLUSH_BITS = 0x8040


def _mxcsr(builder, name: str, slot):
    pointer_type = ir.IntType(8).as_pointer()
    function = cgutils.get_or_insert_function(
        builder.module, ir.FunctionType(ir.VoidType(), [pointer_type]), f"llvm.x86.sse.{name}"
    )
    builder.call(function, [builder.bitcast(slot, pointer_type)])


@intrinsic
def flush_subnormals(typingctx):
    """Switch on flush-to-zero and denormals-are-zero; return the previous mode."""

    def codegen(context, builder, signature, args):
        i32 = ir.IntType(32)
        if not _X86:
            return ir.Constant(i32, 0)
        slot = cgutils.alloca_once(builder, i32)
        _mxcsr(builder, "stmxcsr", slot)
        previous = builder.load(slot)
        builder.store(builder.or_(previous, ir.Constant(i32, _FLUSH_BITS)), slot)
        _mxcsr(builder, "ldmxcsr", slot)
        return previous

    return types.uint32(), codegen


@intrinsic
def restore_float_mode(typingctx, previous):
    """Put back the mode that :func:`flush_subnormals` returned."""

    def codegen(context, builder, signature, args):
        if _X86:
            slot = cgutils.alloca_once(builder, ir.IntType(32))
            builder.store(args[0], slot)
            _mxcsr(builder, "ldmxcsr", slot)
        return context.get_dummy_value()

    return types.void(previous), codegen
