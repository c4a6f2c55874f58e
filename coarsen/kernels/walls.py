"""Broken bonds of one configuration, split by the areas of the domains at their ends.

Runs on the run structures that :func:`coarsen.kernels.domains.domain_areas` leaves behind
(see that module's notes): ``row_first``, ``run_start``, ``run_stop``, ``run_sign``, with
``parent[i]`` the root of run ``i`` and ``area[root]`` the sites of that domain. A broken bond
joins two present sites of opposite sign. It is a *bulk* bond when either end lies in a domain
of fewer than ``min_area`` sites, a *wall* bond otherwise. Bonds are enumerated exactly as the
labelling merges them: consecutive runs of a row (and the x edge of a torus), and the overlaps
of runs of neighbouring rows (shifted by ``-d_x``, plus the wrapped corner bond on a torus),
so the cost is the number of runs, not of sites.
"""

from coarsen.kernels._options import jit_serial

__all__: list[str] = []


@jit_serial
def split_broken_bonds(dims, offsets, periodic, row_first, run_start, run_stop, run_sign,
                       parent, area, min_area):
    """Wall and bulk broken bonds of the configuration last labelled by ``domain_areas``.

    Parameters
    ----------
    dims, offsets, periodic
        As for ``domain_areas``.
    row_first, run_start, run_stop, run_sign, parent, area
        Its scratch arrays after the call (``parent`` holding roots, ``area`` the areas).
    min_area : int
        Domains with fewer sites are bulk excitations.

    Returns
    -------
    wall, bulk : int
        Broken bonds between two domains of at least ``min_area`` sites, and the others.
    """
    nx = dims[0]
    ny = dims[1]
    nz = dims[2]
    n_rows = ny * nz
    wall = 0
    bulk = 0
    for o in range(offsets.shape[0]):
        dx = offsets[o, 0]
        dy = offsets[o, 1]
        dz = offsets[o, 2]
        if dy == 0 and dz == 0:
            for row in range(n_rows):
                first = row_first[row]
                end = row_first[row + 1]
                for i in range(first, end - 1):
                    if run_stop[i] == run_start[i + 1]:  # touching runs have opposite signs
                        if area[parent[i]] < min_area or area[parent[i + 1]] < min_area:
                            bulk += 1
                        else:
                            wall += 1
                last = end - 1
                if (periodic and nx > 1 and last > first and run_start[first] == 0
                        and run_stop[last] == nx and run_sign[first] != run_sign[last]):
                    if area[parent[first]] < min_area or area[parent[last]] < min_area:
                        bulk += 1
                    else:
                        wall += 1
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
                a_first, a_end = row_first[row], row_first[row + 1]
                b_first, b_end = row_first[row2], row_first[row2 + 1]
                if a_first == a_end or b_first == b_end:
                    continue
                a = a_first
                b = b_first
                while a < a_end and b < b_end:
                    a_stop = run_stop[a]
                    b_stop = run_stop[b] - dx
                    low = max(run_start[a], run_start[b] - dx)
                    high = min(a_stop, b_stop)
                    if high > low and run_sign[a] != run_sign[b]:
                        if area[parent[a]] < min_area or area[parent[b]] < min_area:
                            bulk += high - low
                        else:
                            wall += high - low
                    if a_stop < b_stop:
                        a += 1
                    elif b_stop < a_stop:
                        b += 1
                    else:
                        a += 1
                        b += 1
                last = a_end - 1
                if (dx == 1 and periodic and run_stop[last] == nx and run_start[b_first] == 0
                        and run_sign[last] != run_sign[b_first]):
                    if area[parent[last]] < min_area or area[parent[b_first]] < min_area:
                        bulk += 1
                    else:
                        wall += 1
    return wall, bulk
