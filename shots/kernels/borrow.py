"""Borrowed array views: the same data without reference counting, for hot kernel loops.

Numba counts references to every array a compiled function binds or passes on, with atomic
operations on the array's shared header. In the tracer's inner loops that bookkeeping (two
threads touching the same headers) cost more than the ray queries themselves. A borrowed view
has no header (meminfo NULL), so its counting reduces to a null check. It must not outlive the
array it borrows from: take views at the top of a kernel whose caller holds the arrays.
"""

from __future__ import annotations

from numba import types
from numba.core import cgutils
from numba.extending import intrinsic


@intrinsic
def borrow(typingctx, array):
    """A view of ``array`` (any numba array) that is not reference counted."""
    if not isinstance(array, types.Array):
        return None

    def codegen(context, builder, signature, args):
        source = context.make_array(signature.args[0])(context, builder, value=args[0])
        view = context.make_array(signature.return_type)(context, builder)
        view.meminfo = cgutils.get_null_value(view.meminfo.type)
        view.parent = cgutils.get_null_value(view.parent.type)
        view.nitems = source.nitems
        view.itemsize = source.itemsize
        view.data = source.data
        view.shape = source.shape
        view.strides = source.strides
        return view._getvalue()

    return array(array), codegen
