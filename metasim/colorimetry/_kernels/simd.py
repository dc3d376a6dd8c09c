"""Ask LLVM for the widest vectors in one compiled function.

On CPUs with AVX-512, LLVM's default tuning for Intel server cores prefers 256-bit vectors (to
avoid frequency drops that older cores had with 512-bit code). The CIE 2000 and CIELAB loops are
bound by arithmetic throughput, and on current cores 512-bit vectors run them about 1.2× faster,
so those loops call :func:`wide_vectors` first: it sets the function attributes
``prefer-vector-width`` and ``min-legal-vector-width`` to 512 on the function being compiled. On
CPUs without AVX-512 the attributes change nothing. The effect is local to the calling function;
no global numba setting is changed.
"""

from __future__ import annotations

from numba.core import types
from numba.extending import intrinsic

_ATTRIBUTES = ('"prefer-vector-width"="512"', '"min-legal-vector-width"="512"')


@intrinsic
def wide_vectors(typingctx):
    """Compile-time only: mark the enclosing function for 512-bit vectorisation; returns None."""

    def codegen(context, builder, signature, arguments):
        attributes = builder.function.attributes
        for attribute in _ATTRIBUTES:
            # llvmlite validates attribute names against LLVM's enum attributes; these two are
            # string attributes, which LLVM accepts in this "key"="value" form
            set.add(attributes, attribute)
        return context.get_dummy_value()

    return types.none(), codegen


@intrinsic
def small_code(typingctx):
    """Compile-time only: optimise the enclosing function for size (LLVM ``optsize``: no loop
    vectorisation with run-time checks, little unrolling); returns None. For loops over a handful
    of primaries, where vector code costs compile time and gains nothing (measured on the CIELAB
    clipping: half the compile time, same run time). Floating-point results are unchanged: without
    fast-math flags LLVM keeps every operation as written."""

    def codegen(context, builder, signature, arguments):
        builder.function.attributes.add("optsize")
        return context.get_dummy_value()

    return types.none(), codegen
