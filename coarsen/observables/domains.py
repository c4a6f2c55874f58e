"""Domains: connected clusters of equal spins, labelled with the lattice's own connectivity.

Two sites belong to one domain when a path of nearest-neighbour bonds joins them through
sites of the same sign: the bonds of the lattice kind (on the triangular lattice the diagonal
``(1, 1)`` as well), across periodic edges too, so a domain that wraps around the torus is one
domain. Open edges do not wrap. Masked (missing) sites belong to no domain and break paths.

Labelling uses ``scipy.ndimage.label`` once per sign with the lattice's connectivity as the
structuring element; on a torus the labels that meet across each periodic edge are then
merged with ``scipy.sparse.csgraph.connected_components``. Areas are summed from runs of
equal spins along x (or, with many small domains, from a histogram of the labels).
"""

from __future__ import annotations

from functools import lru_cache

import numpy as np
from scipy import ndimage, sparse
from scipy.sparse import csgraph

from coarsen.lattice import Lattice
from coarsen.observables.structure import check_mask, check_stack

__all__ = [
    "domain_count",
    "domain_labels",
    "domain_statistics",
    "largest_domain",
]


@lru_cache(maxsize=16)
def _connectivity(lattice: Lattice) -> np.ndarray:
    """The structuring element: True at the centre and at each neighbour offset."""
    d = lattice.dimension
    structure = np.zeros((3,) * d, dtype=bool)
    structure[(1,) * d] = True
    for offset in lattice.offsets:  # (x, y, z) order; array axes are (z, y, x)
        structure[tuple(1 + c for c in offset[::-1])] = True
    structure.setflags(write=False)
    return structure


@lru_cache(maxsize=16)
def _wrapping_bonds(lattice: Lattice) -> tuple[np.ndarray, np.ndarray]:
    """Flat indices (a, b) of the bonds that cross a periodic edge (each at least once)."""
    if not lattice.periodic:
        empty = np.zeros(0, dtype=np.intp)
        return empty, empty
    size = np.array(lattice.size)
    first, second = [], []
    for offset in lattice.forward_offsets:
        for axis, step in enumerate(offset):
            if step == 0:
                continue
            # the slab x_axis = L_axis - 1: every site there crosses the edge along this bond
            slab_size = size.copy()
            slab_size[axis] = 1
            coords = np.indices(tuple(slab_size)).reshape(len(size), -1).T
            coords[:, axis] = size[axis] - 1
            target = (coords + np.array(offset)) % size
            first.append(lattice.flat_index(coords))
            second.append(lattice.flat_index(target))
    a = np.concatenate(first).astype(np.intp)
    b = np.concatenate(second).astype(np.intp)
    a.setflags(write=False)
    b.setflags(write=False)
    return a, b


def _label_one(values: np.ndarray, lattice: Lattice, mask):
    """Label one configuration: per-sign labels, their merged component ids and areas.

    Returns (up labels, down labels, n_up, component of each per-sign label (n_up + n_down,),
    number of domains, area of each domain).
    """
    structure = _connectivity(lattice)
    up = values > 0
    down = values < 0
    if mask is not None:
        up &= mask
        down &= mask
    up_labels, n_up = ndimage.label(up, structure=structure)
    down_labels, n_down = ndimage.label(down, structure=structure)
    n_labels = n_up + n_down
    a, b = _wrapping_bonds(lattice)
    if len(a) and n_labels:
        nodes = np.concatenate(([-1], np.arange(n_up)))
        down_nodes = np.concatenate(([-1], np.arange(n_up, n_labels)))
        flat_up, flat_down = up_labels.ravel(), down_labels.ravel()
        ends = []
        for flat, lut in ((flat_up, nodes), (flat_down, down_nodes)):
            la, lb = lut[flat[a]], lut[flat[b]]
            keep = (la >= 0) & (lb >= 0) & (la != lb)
            ends.append((la[keep], lb[keep]))
        i = np.concatenate([e[0] for e in ends])
        j = np.concatenate([e[1] for e in ends])
        if len(i):
            graph = sparse.coo_matrix((np.ones(len(i), dtype=np.int8), (i, j)),
                                      shape=(n_labels, n_labels)).tocsr()
            n_domains, component = csgraph.connected_components(graph, directed=False)
        else:
            n_domains, component = n_labels, np.arange(n_labels)
    else:
        n_domains, component = n_labels, np.arange(n_labels)
    label_areas = _label_areas(values, up_labels, down_labels, n_up, n_down, mask)
    areas = np.bincount(component, weights=label_areas, minlength=n_domains).astype(np.int64)
    return up_labels, down_labels, n_up, component, n_domains, areas


def _label_areas(values, up_labels, down_labels, n_up: int, n_down: int, mask) -> np.ndarray:
    """Sites of each per-sign label (up labels first), counted by runs along x.

    A run is a stretch of equal values within one row; it lies in one domain, so the areas are
    sums of run lengths. With large domains this reads far fewer entries than a histogram of
    the labels (whose long stretches of one label also serialise the counting); with small
    domains (more than one label per 64 sites) the histogram is used.
    """
    n_labels = n_up + n_down
    if n_labels * 64 > values.size:  # small domains: many runs; a histogram is cheaper
        return np.concatenate((np.bincount(up_labels.ravel(), minlength=n_up + 1)[1:],
                               np.bincount(down_labels.ravel(), minlength=n_down + 1)[1:]))
    flat = values.ravel()
    if mask is not None:
        flat = np.where(mask.ravel(), flat, 0)
    n = flat.size
    starts = np.empty(n, dtype=bool)
    starts[0] = True
    np.not_equal(flat[1:], flat[:-1], out=starts[1:])
    starts[:: values.shape[-1]] = True  # every row starts a run
    first = np.flatnonzero(starts)
    lengths = np.diff(first, append=n)
    sign = flat[first]
    node = np.where(sign > 0, up_labels.ravel()[first] - 1,
                    np.where(sign < 0, down_labels.ravel()[first] - 1 + n_up, -1))
    use = node >= 0
    return np.bincount(node[use], weights=lengths[use], minlength=n_labels)


def _check(spins, lattice, mask):
    check_stack(spins, lattice)
    return check_mask(mask, lattice)


def domain_labels(spins: np.ndarray, lattice: Lattice, mask: np.ndarray | None = None,
                  ) -> tuple[np.ndarray, np.ndarray]:
    """Label the domains of each configuration.

    Parameters
    ----------
    spins : ndarray of shape (R, *lattice.shape)
        Configurations; positive values are up, negative down (the staggered field for
        Neel order).
    lattice : Lattice
    mask : ndarray of shape lattice.shape and dtype bool, optional
        True where a site is present.

    Returns
    -------
    labels : ndarray of shape (R, *lattice.shape), int32
        ``1 .. n`` for the n domains of each replica, 0 at masked sites. The numbering has
        no meaning beyond identity: ``labels[r] == labels[r][site]`` is the domain holding
        ``site``.
    counts : ndarray of shape (R,), int64
        Number of domains n of each replica.
    """
    mask = _check(spins, lattice, mask)
    labels = np.zeros(spins.shape, dtype=np.int32)
    counts = np.zeros(spins.shape[0], dtype=np.int64)
    for rep in range(spins.shape[0]):
        up_labels, down_labels, n_up, component, n_domains, _ = _label_one(spins[rep], lattice,
                                                                           mask)
        number = np.concatenate(([0], component + 1)).astype(np.int32)
        down_number = np.concatenate(([0], number[1 + n_up:]))
        labels[rep] = number[: n_up + 1][up_labels] + down_number[down_labels]
        counts[rep] = n_domains
    return labels, counts


def domain_statistics(spins: np.ndarray, lattice: Lattice, mask: np.ndarray | None = None,
                      ) -> tuple[np.ndarray, np.ndarray]:
    """Number of domains and the largest domain's share of the present sites.

    Parameters
    ----------
    spins : ndarray of shape (R, *lattice.shape)
    lattice : Lattice
    mask : ndarray of shape lattice.shape and dtype bool, optional

    Returns
    -------
    count : ndarray of shape (R,), int64
        Domains of both signs.
    largest : ndarray of shape (R,), float64
        Area (sites) of the largest domain divided by the number of present sites.
    """
    mask = _check(spins, lattice, mask)
    n_present = lattice.n_sites if mask is None else int(np.count_nonzero(mask))
    return count_and_largest(spins, lattice, mask, n_present)


def count_and_largest(spins, lattice: Lattice, mask, n_present: int):
    """:func:`domain_statistics` without the input checks (for callers that made them)."""
    count = np.zeros(spins.shape[0], dtype=np.int64)
    largest = np.zeros(spins.shape[0], dtype=np.float64)
    for rep in range(spins.shape[0]):
        *_, n_domains, areas = _label_one(spins[rep], lattice, mask)
        count[rep] = n_domains
        largest[rep] = areas.max() / n_present if n_domains else 0.0
    return count, largest


def domain_count(spins: np.ndarray, lattice: Lattice, mask: np.ndarray | None = None,
                 ) -> np.ndarray:
    """Number of domains (both signs) of each configuration, shape (R,), int64."""
    return domain_statistics(spins, lattice, mask)[0]


def largest_domain(spins: np.ndarray, lattice: Lattice, mask: np.ndarray | None = None,
                   ) -> np.ndarray:
    """Area of the largest domain as a fraction of the present sites, shape (R,), float64."""
    return domain_statistics(spins, lattice, mask)[1]
