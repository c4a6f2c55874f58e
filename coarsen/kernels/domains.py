"""Domain labelling by union-find over runs of equal signs, both signs in one pass.

A configuration is a flat int8 array ``signs`` of the sites in C order of the array axes
(z, y, x): +1 and -1 for the two signs, 0 for a site that belongs to no domain (masked).
``dims`` holds (n_x, n_y, n_z) (1 for missing axes) and ``offsets`` the forward bond offsets
(d_x, d_y, d_z) of the lattice, each component 0 or 1.

The scan works on runs, not sites:

1. Runs: along each row (fixed y, z) a stretch of equal nonzero signs is one run, numbered in
   raster order; ``run_start`` and ``run_stop`` hold its first x and one past its last,
   ``run_sign`` its sign and ``row_first[row]`` the number of the row's first run.
2. Bonds: for each offset with a step along y or z, every row is walked side by side with its
   neighbour row (wrapped on a torus, skipped past an open edge), the neighbour shifted by
   ``-d_x``; two runs of one sign that overlap hold a bond and are merged. On a torus the x
   edge joins the last run of a row to the first (offset (1, 0, 0)), and an offset with
   ``d_x = 1`` also joins the last site of a row to the first site of the neighbour row.
   The walk costs the number of runs, not of sites: grown domains are cheap.
3. Roots: merges keep ``parent[i] <= i`` (Rem's union-find with splicing), so a root is the
   first run of its domain in raster order, and one pass over the runs in that order
   flattens the forest, counts the roots and sums the areas into them.

All functions are serial and touch only their arguments (callers give each thread its own
scratch arrays); the scratch arrays have one entry per site but only the first ``n_runs``
entries are used.
"""

from coarsen.kernels._options import jit_serial

__all__: list[str] = []


@jit_serial
def _merge(parent, a, b):
    """Join the trees of runs ``a`` and ``b`` (Rem's algorithm with splicing).

    Keeps ``parent[i] <= i``: while climbing, the node with the larger parent is hooked onto
    the other's parent, so the root of a tree is its smallest run number.
    """
    while parent[a] != parent[b]:
        if parent[a] > parent[b]:
            if a == parent[a]:
                parent[a] = parent[b]
                return
            up = parent[a]
            parent[a] = parent[b]
            a = up
        else:
            if b == parent[b]:
                parent[b] = parent[a]
                return
            up = parent[b]
            parent[b] = parent[a]
            b = up


@jit_serial
def _find_runs(signs, nx, n_rows, row_first, run_start, run_stop, run_sign, parent):
    """Step 1 of the module notes; returns the number of runs."""
    n = 0
    for row in range(n_rows):
        row_first[row] = n
        base = row * nx
        previous = 0
        for x in range(nx):
            v = signs[base + x]
            if v != previous:
                if previous != 0:
                    run_stop[n - 1] = x
                if v != 0:
                    run_start[n] = x
                    run_sign[n] = v
                    parent[n] = n
                    n += 1
                previous = v
        if previous != 0:
            run_stop[n - 1] = nx
    row_first[n_rows] = n
    return n


@jit_serial
def _join_rows(a, a_end, b, b_end, shift, run_start, run_stop, run_sign, parent):
    """Merge the overlapping runs of one sign of two rows (runs a.. and b.., the second row
    shifted by ``-shift`` along x)."""
    while a < a_end and b < b_end:
        a_stop = run_stop[a]
        b_stop = run_stop[b] - shift
        low = max(run_start[a], run_start[b] - shift)
        if low < min(a_stop, b_stop) and run_sign[a] == run_sign[b]:
            _merge(parent, a, b)
        if a_stop < b_stop:
            a += 1
        elif b_stop < a_stop:
            b += 1
        else:
            a += 1
            b += 1


@jit_serial
def _label_runs(signs, dims, offsets, periodic, row_first, run_start, run_stop, run_sign,
                parent):
    """Steps 1 and 2 of the module notes; returns the number of runs."""
    nx = dims[0]
    ny = dims[1]
    nz = dims[2]
    n_rows = ny * nz
    n_runs = _find_runs(signs, nx, n_rows, row_first, run_start, run_stop, run_sign, parent)
    for o in range(offsets.shape[0]):
        dx = offsets[o, 0]
        dy = offsets[o, 1]
        dz = offsets[o, 2]
        if dy == 0 and dz == 0:
            if periodic and nx > 1:  # the bonds (1, 0, 0) across the x edge
                for row in range(n_rows):
                    first = row_first[row]
                    last = row_first[row + 1] - 1
                    if (last > first and run_start[first] == 0 and run_stop[last] == nx
                            and run_sign[first] == run_sign[last]):
                        _merge(parent, first, last)
            continue
        for z in range(nz):
            z2 = z + dz
            if z2 >= nz:
                if not periodic:
                    continue
                z2 -= nz
            for y in range(ny):
                y2 = y + dy
                if y2 >= ny:
                    if not periodic:
                        continue
                    y2 -= ny
                row = z * ny + y
                row2 = z2 * ny + y2
                a, a_end = row_first[row], row_first[row + 1]
                b, b_end = row_first[row2], row_first[row2 + 1]
                if a == a_end or b == b_end:
                    continue
                _join_rows(a, a_end, b, b_end, dx, run_start, run_stop, run_sign, parent)
                # d_x = 1 on a torus: the last site of the row and the first of the other
                if (dx == 1 and periodic and run_stop[a_end - 1] == nx and run_start[b] == 0
                        and run_sign[a_end - 1] == run_sign[b]):
                    _merge(parent, a_end - 1, b)
    return n_runs


@jit_serial
def domain_areas(signs, dims, offsets, periodic, row_first, run_start, run_stop, run_sign,
                 parent, area):
    """Number of domains and the largest area of one configuration.

    Parameters
    ----------
    signs : ndarray of shape (N,), int8
        +1, -1, or 0 for a site in no domain.
    dims : ndarray of shape (3,), int64
        (n_x, n_y, n_z).
    offsets : ndarray of shape (n_bonds, 3), int64
        Forward bond offsets, components 0 or 1.
    periodic : bool
    row_first : ndarray of shape (n_y n_z + 1,), int64
        Scratch: the first run of each row.
    run_start, run_stop, parent, area : ndarray of shape (N,), int32
        Scratch: the runs, the forest on them (on return each run's root) and the areas of
        the roots.
    run_sign : ndarray of shape (N,), int8
        Scratch: the sign of each run.

    Returns
    -------
    count : int
        Number of domains (both signs).
    largest : int
        Sites in the largest domain (0 without domains).
    """
    n_runs = _label_runs(signs, dims, offsets, periodic, row_first, run_start, run_stop,
                         run_sign, parent)
    count = 0
    largest = 0
    for i in range(n_runs):
        root = parent[parent[i]]  # runs before i already point at their roots
        parent[i] = root
        length = run_stop[i] - run_start[i]
        if root == i:
            count += 1
            area[i] = length
        else:
            area[root] += length
        if area[root] > largest:
            largest = area[root]
    return count, largest


@jit_serial
def domain_numbers(signs, dims, offsets, periodic, row_first, run_start, run_stop, run_sign,
                   parent, out):
    """Label the domains 1 .. n of one configuration in the order of their first site.

    Parameters as :func:`domain_areas` (without ``area``), and ``out``, ndarray of shape
    (N,), int32, which receives the domain of each site (0 for no domain). Returns n.
    """
    n_runs = _label_runs(signs, dims, offsets, periodic, row_first, run_start, run_stop,
                         run_sign, parent)
    nx = dims[0]
    count = 0
    for i in range(n_runs):  # parent[root] becomes -(domain number)
        p = parent[i]  # a root, or an earlier run, already renumbered
        if p == i:
            count += 1
            parent[i] = -count
        else:
            parent[i] = parent[p]
    out[:] = 0
    n_rows = row_first.shape[0] - 1
    for row in range(n_rows):
        base = row * nx
        for i in range(row_first[row], row_first[row + 1]):
            number = -parent[i]
            for x in range(run_start[i], run_stop[i]):
                out[base + x] = number
    return count
