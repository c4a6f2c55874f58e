"""Neighbour arithmetic shared by the plain-layout kernels.

Lattice kinds are small integer codes (``KIND_CODES``); a site is ``(x, y, z)`` with flat index
``(z * ny + y) * nx + x``; unused axes have length 1. Open boundaries drop the bonds across
the edges: a missing neighbour contributes 0 to a local field.
"""

import numba
import numpy as np

from coarsen.kernels._options import jit_inline

__all__: list[str] = []

CHAIN, SQUARE, TRIANGULAR, CUBIC = 0, 1, 2, 3
KIND_CODES = {"chain": CHAIN, "square": SQUARE, "triangular": TRIANGULAR, "cubic": CUBIC}


@numba.extending.intrinsic
def prefetch(typingctx, array, index):
    """Hint the processor to load ``array[index]`` into cache (LLVM ``llvm.prefetch``)."""
    from llvmlite import ir

    sig = numba.core.types.void(array, index)

    def codegen(context, builder, signature, args):
        ary = context.make_array(signature.args[0])(context, builder, args[0])
        ptr = builder.gep(ary.data, [args[1]])
        i8p = ir.IntType(8).as_pointer()
        fnty = ir.FunctionType(ir.VoidType(), [i8p, ir.IntType(32), ir.IntType(32), ir.IntType(32)])
        fn = builder.module.declare_intrinsic("llvm.prefetch", fnty=fnty)
        builder.call(fn, [builder.bitcast(ptr, i8p), ir.Constant(ir.IntType(32), 0),
                          ir.Constant(ir.IntType(32), 3), ir.Constant(ir.IntType(32), 1)])
        return context.get_dummy_value()

    return sig, codegen


@jit_inline
def _spin(spins, index, present):
    return spins[np.uint64(index)] if present else np.int8(0)


@jit_inline
def local_field(spins, x, y, z, nx, ny, nz, kind, periodic):
    """Sum of the neighbour spins of site (x, y, z), an int64 in [-coordination, coordination]."""
    row = (z * ny + y) * nx
    xm = x - 1 if x > 0 else nx - 1
    xp = x + 1 if x < nx - 1 else 0
    s = np.int64(_spin(spins, row + xm, periodic or x > 0))
    s += _spin(spins, row + xp, periodic or x < nx - 1)
    if kind == CHAIN:
        return s
    ym = y - 1 if y > 0 else ny - 1
    yp = y + 1 if y < ny - 1 else 0
    has_ym = periodic or y > 0
    has_yp = periodic or y < ny - 1
    plane = z * ny
    s += _spin(spins, (plane + ym) * nx + x, has_ym)
    s += _spin(spins, (plane + yp) * nx + x, has_yp)
    if kind == TRIANGULAR:
        s += _spin(spins, (plane + yp) * nx + xp, has_yp and (periodic or x < nx - 1))
        s += _spin(spins, (plane + ym) * nx + xm, has_ym and (periodic or x > 0))
    elif kind == CUBIC:
        zm = z - 1 if z > 0 else nz - 1
        zp = z + 1 if z < nz - 1 else 0
        s += _spin(spins, (zm * ny + y) * nx + x, periodic or z > 0)
        s += _spin(spins, (zp * ny + y) * nx + x, periodic or z < nz - 1)
    return s


@jit_inline
def prefetch_site(spins, x, y, z, nx, ny, nz, kind):
    """Prefetch the cache lines holding site (x, y, z) and its neighbours in other rows."""
    plane = z * ny
    prefetch(spins, np.uint64((plane + y) * nx + x))
    if kind != CHAIN:
        ym = y - 1 if y > 0 else ny - 1
        yp = y + 1 if y < ny - 1 else 0
        prefetch(spins, np.uint64((plane + ym) * nx + x))
        prefetch(spins, np.uint64((plane + yp) * nx + x))
    if kind == CUBIC:
        zm = z - 1 if z > 0 else nz - 1
        zp = z + 1 if z < nz - 1 else 0
        prefetch(spins, np.uint64((zm * ny + y) * nx + x))
        prefetch(spins, np.uint64((zp * ny + y) * nx + x))


@jit_inline
def neighbour_index(x, y, z, dx, dy, dz, nx, ny, nz, periodic):
    """Flat index of the neighbour at offset (dx, dy, dz), or -1 across an open edge."""
    xn = x + dx
    yn = y + dy
    zn = z + dz
    inside = (0 <= xn < nx) and (0 <= yn < ny) and (0 <= zn < nz)
    if not inside and not periodic:
        return np.int64(-1)
    xn = xn + nx if xn < 0 else (xn - nx if xn >= nx else xn)
    yn = yn + ny if yn < 0 else (yn - ny if yn >= ny else yn)
    zn = zn + nz if zn < 0 else (zn - nz if zn >= nz else zn)
    return (zn * ny + yn) * nx + xn


@jit_inline
def periodic_neighbours(x, y, z, nx, ny, nz, kind):
    """Flat indices of the neighbours of site (x, y, z) of a periodic lattice, as a 6-tuple:
    x - 1 and x + 1, then (not for the chain) y - 1 and y + 1, then the triangular diagonals
    (x + 1, y + 1) and (x - 1, y - 1) or the cubic z - 1 and z + 1; entries past the
    coordination are 0. Written for vectorised loops (selects, no branches on data)."""
    xm = x - 1 if x > 0 else nx - 1
    xp = x + 1 if x < nx - 1 else 0
    row = (z * ny + y) * nx
    n0 = row + xm
    n1 = row + xp
    n2 = 0
    n3 = 0
    n4 = 0
    n5 = 0
    if kind != CHAIN:
        ym = y - 1 if y > 0 else ny - 1
        yp = y + 1 if y < ny - 1 else 0
        n2 = (z * ny + ym) * nx + x
        n3 = (z * ny + yp) * nx + x
        if kind == TRIANGULAR:
            n4 = (z * ny + yp) * nx + xp
            n5 = (z * ny + ym) * nx + xm
        elif kind == CUBIC:
            zm = z - 1 if z > 0 else nz - 1
            zp = z + 1 if z < nz - 1 else 0
            n4 = (zm * ny + y) * nx + x
            n5 = (zp * ny + y) * nx + x
    return n0, n1, n2, n3, n4, n5
