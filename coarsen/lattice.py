"""Lattice geometry: the four lattice kinds, neighbours, sublattices, critical temperatures.

Sites are addressed by integer coordinates ``(x,)``, ``(x, y)`` or ``(x, y, z)``; a spin
configuration of one lattice is an array of shape ``lattice.shape`` and a stack of replicas has
shape ``(replicas, *lattice.shape)``. The *last* array axis is ``x``, the one a row runs along,
so for a square lattice ``spins[r, y, x]``. The triangular lattice is stored as a sheared square
grid: site ``(x, y)`` has the six neighbours ``(x +- 1, y)``, ``(x, y +- 1)`` and
``(x + 1, y + 1)``, ``(x - 1, y - 1)``.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field
from functools import cached_property

import numpy as np

__all__ = [
    "BOUNDARIES",
    "CRITICAL_TEMPERATURE",
    "LATTICE_KINDS",
    "Lattice",
]

#: Lattice kinds and their number of dimensions.
LATTICE_KINDS: dict[str, int] = {"chain": 1, "square": 2, "triangular": 2, "cubic": 3}

#: Boundary conditions.
BOUNDARIES: tuple[str, ...] = ("periodic", "open")

#: Known critical temperatures in units of J/k_B for the ferromagnet (J = 1).
#: square: Onsager (1944), 2/ln(1 + sqrt 2); triangular: Houtappel (1950), 4/ln 3;
#: cubic: high-precision Monte Carlo, Ferrenberg, Xu & Landau, Phys. Rev. E 97, 043301 (2018);
#: chain: no order at any finite temperature (Ising 1925).
CRITICAL_TEMPERATURE: dict[str, float] = {
    "chain": 0.0,
    "square": 2.0 / math.log(1.0 + math.sqrt(2.0)),
    "triangular": 4.0 / math.log(3.0),
    "cubic": 4.5115232,
}

# Neighbour offsets in (x, y, z) order; each bond appears once in the "forward" half.
_FORWARD_OFFSETS: dict[str, tuple[tuple[int, ...], ...]] = {
    "chain": ((1,),),
    "square": ((1, 0), (0, 1)),
    "triangular": ((1, 0), (0, 1), (1, 1)),
    "cubic": ((1, 0, 0), (0, 1, 0), (0, 0, 1)),
}

#: Smallest size per axis. A periodic axis shorter than 3 would make one site a neighbour of
#: another twice (size 2) or of itself (size 1); an open axis needs 2 sites to have a bond.
MINIMUM_SIZE = {"periodic": 3, "open": 2}


@dataclass(frozen=True)
class Lattice:
    """A finite lattice of one of the supported kinds.

    Parameters
    ----------
    kind : {"chain", "square", "triangular", "cubic"}
        The lattice kind.
    size : tuple of int, or int
        Sites per axis in (x, y, z) order, one entry per dimension (an int means the same size
        on every axis). Every entry must be at least 3 (periodic) or 2 (open).
    boundary : {"periodic", "open"}, default: "periodic"
        Periodic boundaries wrap every axis; open boundaries drop the bonds across the edges.

    Notes
    -----
    ``size`` holds sites per axis in (x, y, z) order, as the spec file writes them; the
    ``shape`` property gives the NumPy array shape ``(z, y, x)`` (reversed), so that rows
    along x are contiguous in memory.

    Raises
    ------
    ValueError
        For an unknown kind or boundary, a wrong number of sizes, or a size below the minimum.
    """

    kind: str
    size: tuple[int, ...]
    boundary: str = "periodic"
    _cache: dict = field(default_factory=dict, init=False, repr=False, compare=False)

    def __post_init__(self):
        if self.kind not in LATTICE_KINDS:
            raise ValueError(
                f"lattice kind: {self.kind!r} is not a lattice kind; choose one of "
                f"{', '.join(LATTICE_KINDS)}"
            )
        if self.boundary not in BOUNDARIES:
            raise ValueError(
                f"lattice boundary: {self.boundary!r} is not a boundary; choose one of "
                f"{', '.join(BOUNDARIES)}"
            )
        size = self.size
        if isinstance(size, (int, np.integer)):
            size = (int(size),) * LATTICE_KINDS[self.kind]
        try:
            if not all(isinstance(n, (int, np.integer)) and not isinstance(n, bool) for n in size):
                raise TypeError
            size = tuple(int(n) for n in size)
        except TypeError:
            raise ValueError(
                f"lattice size: {self.size!r} is not a list of whole numbers of sites"
            ) from None
        d = LATTICE_KINDS[self.kind]
        if len(size) != d:
            raise ValueError(
                f"lattice size: {list(size)!r} has {len(size)} entries but a {self.kind} lattice "
                f"has {d} dimension{'s' if d > 1 else ''}; give one size per axis"
            )
        smallest = MINIMUM_SIZE[self.boundary]
        if min(size) < smallest:
            article = "an" if self.boundary == "open" else "a"
            raise ValueError(
                f"lattice size: {list(size)!r} is too small; every axis of {article} "
                f"{self.boundary} lattice needs at least {smallest} sites"
            )
        object.__setattr__(self, "size", size)

    # --- basic geometry -------------------------------------------------------------------
    @property
    def dimension(self) -> int:
        """Number of spatial dimensions."""
        return LATTICE_KINDS[self.kind]

    @property
    def shape(self) -> tuple[int, ...]:
        """NumPy array shape of one configuration: ``(z, y, x)`` order, x contiguous."""
        return self.size[::-1]

    @property
    def n_sites(self) -> int:
        """Number of sites N."""
        return math.prod(self.size)

    @property
    def periodic(self) -> bool:
        """True for periodic boundaries."""
        return self.boundary == "periodic"

    @property
    def coordination(self) -> int:
        """Number of neighbours of a bulk site."""
        return 2 * len(_FORWARD_OFFSETS[self.kind])

    @property
    def forward_offsets(self) -> tuple[tuple[int, ...], ...]:
        """One offset per bond direction, in (x, y, z) order."""
        return _FORWARD_OFFSETS[self.kind]

    @property
    def offsets(self) -> tuple[tuple[int, ...], ...]:
        """All neighbour offsets in (x, y, z) order: the forward ones, then their negatives."""
        fwd = self.forward_offsets
        return fwd + tuple(tuple(-c for c in o) for o in fwd)

    @property
    def tc(self) -> float:
        """Known critical temperature of the infinite ferromagnet, J/k_B = 1 (0 for the chain)."""
        return CRITICAL_TEMPERATURE[self.kind]

    @property
    def bipartite(self) -> bool:
        """True when the lattice splits into two sublattices with bonds only between them."""
        if self.kind == "triangular":
            return False
        return (not self.periodic) or all(n % 2 == 0 for n in self.size)

    # --- sublattices ----------------------------------------------------------------------
    @property
    def n_colours(self) -> int:
        """Number of sublattices of the natural colouring: 2 (bipartite kinds) or 3 (triangular)."""
        return 3 if self.kind == "triangular" else 2

    def colouring_error(self) -> str | None:
        """Why the natural colouring is not a proper colouring of this lattice, or None.

        A proper colouring (no bond joins two sites of one colour) is what a sublattice
        (checkerboard) update needs. On periodic lattices the two-colouring needs even sizes
        and the three-colouring of the triangular lattice sizes divisible by 3.
        """
        k = self.n_colours
        if self.periodic and any(n % k for n in self.size):
            need = "even" if k == 2 else "divisible by 3"
            return (
                f"lattice size: {list(self.size)!r} does not split into {k} sublattices on a "
                f"periodic {self.kind} lattice; sublattice (checkerboard) updates need every "
                f"size {need}"
            )
        if self.size[0] % 2 and k == 2:
            return (
                f"lattice size: {list(self.size)!r}: sublattice (checkerboard) updates store each "
                f"colour as half of every row, so the x size {self.size[0]} must be even"
            )
        if self.size[0] % 3 and k == 3:
            return (
                f"lattice size: {list(self.size)!r}: sublattice (checkerboard) updates of the "
                f"triangular lattice need the x size {self.size[0]} divisible by 3"
            )
        return None

    @cached_property
    def sublattice(self) -> np.ndarray:
        """Colour of each site, ndarray of shape ``shape`` and dtype int8.

        ``sum(coordinates) mod 2`` for chain, square and cubic; ``(x + y) mod 3`` for the
        triangular lattice (its six neighbour offsets all change ``x + y`` by 1 or 2 mod 3).
        """
        grids = np.indices(self.shape)  # (z, y, x) order
        colours = (grids.sum(axis=0) % self.n_colours).astype(np.int8)
        colours.setflags(write=False)
        return colours

    @cached_property
    def staggering(self) -> np.ndarray:
        """``(-1)**colour`` on bipartite lattices, int8 of shape ``shape``: the Néel sign field.

        Raises
        ------
        ValueError
            On a lattice that is not bipartite (triangular, or periodic with an odd size).
        """
        if not self.bipartite:
            raise ValueError(
                f"order: 'neel' needs a bipartite lattice, but a {self.boundary} {self.kind} "
                f"lattice of size {list(self.size)!r} is not bipartite"
            )
        signs = (1 - 2 * (self.sublattice & 1)).astype(np.int8)
        signs.setflags(write=False)
        return signs

    # --- neighbours -----------------------------------------------------------------------
    def flat_index(self, coords: np.ndarray) -> np.ndarray:
        """Flat (C-order) site index of coordinates given in (x, y, z) order along the last axis."""
        coords = np.asarray(coords)
        return np.ravel_multi_index(tuple(coords[..., ::-1].T), self.shape).T

    @cached_property
    def neighbour_table(self) -> np.ndarray:
        """Flat indices of each site's neighbours, ndarray of shape (N, z) and dtype int64.

        Column j holds the neighbour at ``offsets[j]``; a missing neighbour across an open edge
        is marked -1. Memory is 8 z N bytes: meant for analysis and tests, not for the
        dynamics kernels (they compute neighbours arithmetically).
        """
        coords = np.stack(np.unravel_index(np.arange(self.n_sites), self.shape), axis=-1)
        coords = coords[:, ::-1]  # to (x, y, z)
        size = np.array(self.size)
        table = np.empty((self.n_sites, self.coordination), dtype=np.int64)
        for j, off in enumerate(self.offsets):
            nb = coords + np.array(off)
            if self.periodic:
                nb %= size
                table[:, j] = self.flat_index(nb)
            else:
                inside = np.all((nb >= 0) & (nb < size), axis=1)
                idx = np.full(self.n_sites, -1, dtype=np.int64)
                idx[inside] = self.flat_index(nb[inside])
                table[:, j] = idx
        table.setflags(write=False)
        return table

    @cached_property
    def n_bonds(self) -> int:
        """Number of nearest-neighbour bonds (each counted once)."""
        return int(np.count_nonzero(self.neighbour_table >= 0) // 2)

    def describe(self) -> str:
        """Short text such as ``'square 256x256 periodic'``."""
        return f"{self.kind} {'x'.join(map(str, self.size))} {self.boundary}"
