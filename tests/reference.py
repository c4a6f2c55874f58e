"""Brute-force twins of the engine: slow, plain Python, written to be obviously correct.

Nothing here calls a kernel, and nothing reads the engine's geometry: neighbours are found
from site coordinates with the offsets written out below (the order the kernels document for
the Kawasaki bond direction), and energies are bond loops over those lists. The only engine
functions used are the probability tables ``coarsen.engine.flip_probabilities`` and
``coarsen.engine.exchange_probabilities``, turned into integer thresholds by the documented
formula ``floor(p * 2**31) - 1`` (capped at ``2**31 - 1``).

Random words follow the documented consumption exactly:

* a *stream* is 16 xoshiro256** lanes; a draw advances every lane once and yields 32 words,
  lane by lane, low 32 bits first;
* random-sequential sweeps (Glauber: d + 1 words per attempt; local Kawasaki: d + 2;
  nonlocal Kawasaki: 3) draw the words of up to 256 attempts at a time, rounded up to whole
  draws, and discard what is left of the last draw;
* checkerboard sweeps take one stream per row block, rows in (z, y) order, and each row of a
  colour draws ceil(n / 32) whole draws for its n sites of that colour, word m for its m-th
  site in increasing x.

``checkerboard_sweeps_numpy`` is a vectorised version of the checkerboard twin (whole colours
at once, all row-block streams in lock step) for lattices of 2**18 sites, where the loops are
too slow; the tests check it against the loop twin first.
"""

from __future__ import annotations

import math

import numpy as np

from coarsen.engine import exchange_probabilities, flip_probabilities

__all__ = [
    "LANES",
    "OFFSETS",
    "Geometry",
    "Stream",
    "StreamBank",
    "advance",
    "bond_sum",
    "checkerboard_sweep",
    "checkerboard_sweeps_numpy",
    "energy_per_site",
    "glauber_sweep",
    "kawasaki_local_sweep",
    "kawasaki_nonlocal_sweep",
    "row_blocks",
    "scale",
    "threshold",
    "xoshiro_next",
]

LANES = 16
MASK64 = (1 << 64) - 1
MASK32 = (1 << 32) - 1
ATTEMPTS_PER_BLOCK = 256
MAX_ROW_BLOCKS = 64

#: Neighbour offsets in (x, y, z) order: the forward directions, then their negatives.
#: The triangular lattice is a sheared square grid with the extra diagonal (1, 1).
OFFSETS = {
    "chain": ((1, 0, 0), (-1, 0, 0)),
    "square": ((1, 0, 0), (0, 1, 0), (-1, 0, 0), (0, -1, 0)),
    "triangular": ((1, 0, 0), (0, 1, 0), (1, 1, 0), (-1, 0, 0), (0, -1, 0), (-1, -1, 0)),
    "cubic": ((1, 0, 0), (0, 1, 0), (0, 0, 1), (-1, 0, 0), (0, -1, 0), (0, 0, -1)),
}
DIMENSION = {"chain": 1, "square": 2, "triangular": 2, "cubic": 3}


# --------------------------------------------------------------------------------------------
# xoshiro256** (Blackman & Vigna, ACM TOMS 47, 36 (2021)), one generator per lane
# --------------------------------------------------------------------------------------------
def _rotl(x: int, k: int) -> int:
    return ((x << k) | (x >> (64 - k))) & MASK64


def xoshiro_next(s: list[int]) -> int:
    """Advance the 4-word state ``s`` (a list, modified) and return the 64-bit output."""
    result = (_rotl((s[1] * 5) & MASK64, 7) * 9) & MASK64
    t = (s[1] << 17) & MASK64
    s[2] ^= s[0]
    s[3] ^= s[1]
    s[1] ^= s[2]
    s[0] ^= s[3]
    s[2] ^= t
    s[3] = _rotl(s[3], 45)
    return result


class Stream:
    """Sixteen interleaved xoshiro256** generators read from a flat ``uint64[64]`` state.

    Word j of lane l is ``state[j * 16 + l]``. ``draw()`` advances every lane once and returns
    32 uint32 words: lane 0 low half, lane 0 high half, lane 1 low half, ...
    """

    def __init__(self, state):
        state = [int(v) for v in np.asarray(state, dtype=np.uint64).ravel()]
        assert len(state) == 4 * LANES
        self.lanes = [[state[j * LANES + lane] for j in range(4)] for lane in range(LANES)]

    def draw(self) -> list[int]:
        out = []
        for lane in self.lanes:
            v = xoshiro_next(lane)
            out.append(v & MASK32)
            out.append(v >> 32)
        return out

    def words(self, draws: int) -> list[int]:
        out = []
        for _ in range(draws):
            out.extend(self.draw())
        return out

    def state(self) -> np.ndarray:
        flat = [0] * (4 * LANES)
        for lane, s in enumerate(self.lanes):
            for j in range(4):
                flat[j * LANES + lane] = s[j]
        return np.array(flat, dtype=np.uint64)


def scale(word: int, n: int) -> int:
    """Multiply-shift map of a 32-bit word to [0, n)."""
    return (word * n) >> 32


def threshold(p: float) -> int:
    """The documented integer threshold of probability p: floor(p 2**31) - 1, at most 2**31 - 1."""
    return min(math.floor(p * 2.0**31) - 1, 2**31 - 1)


def _draws_for(n_words: int) -> int:
    return -(-n_words // (2 * LANES))


# --------------------------------------------------------------------------------------------
# geometry by brute force
# --------------------------------------------------------------------------------------------
class Geometry:
    """Sites, coordinates and neighbour lists of a lattice, found from coordinates.

    Reads only ``kind``, ``size`` and ``boundary`` of the lattice. Flat index of (x, y, z)
    is ``(z * ny + y) * nx + x`` (x fastest, as in a C-ordered array of shape (z, y, x)).
    ``full[i][j]`` is the neighbour of site i at ``OFFSETS[kind][j]`` or None across an open
    edge; ``present[i]`` lists the neighbours that exist.
    """

    def __init__(self, lattice):
        self.kind = lattice.kind
        self.dimension = DIMENSION[self.kind]
        size = tuple(int(n) for n in lattice.size)
        assert len(size) == self.dimension
        self.size = size
        self.nx, self.ny, self.nz = (size + (1, 1))[:3]
        self.periodic = lattice.boundary == "periodic"
        self.offsets = OFFSETS[self.kind]
        self.z = len(self.offsets)
        self.n_sites = self.nx * self.ny * self.nz
        self.coords = []
        for z in range(self.nz):
            for y in range(self.ny):
                for x in range(self.nx):
                    self.coords.append((x, y, z))
        self.full = []
        for (x, y, z) in self.coords:
            row = []
            for dx, dy, dz in self.offsets:
                xn, yn, zn = x + dx, y + dy, z + dz
                if self.periodic:
                    xn, yn, zn = xn % self.nx, yn % self.ny, zn % self.nz
                    row.append(self.index(xn, yn, zn))
                elif 0 <= xn < self.nx and 0 <= yn < self.ny and 0 <= zn < self.nz:
                    row.append(self.index(xn, yn, zn))
                else:
                    row.append(None)
            self.full.append(row)
        self.present = [[j for j in row if j is not None] for row in self.full]
        self._rows = {}

    def index(self, x: int, y: int = 0, z: int = 0) -> int:
        return (z * self.ny + y) * self.nx + x

    def table(self) -> np.ndarray:
        """Neighbour table (N, z) with -1 for a missing neighbour."""
        return np.array([[-1 if j is None else j for j in row] for row in self.full],
                        dtype=np.int64)

    def bonds(self) -> list[tuple[int, int]]:
        """Every bond once, as (i, j) with i < j."""
        out = set()
        for i, row in enumerate(self.present):
            for j in row:
                out.add((min(i, j), max(i, j)))
        return sorted(out)

    def colour(self, site: int) -> int:
        x, y, z = self.coords[site]
        if self.kind == "triangular":
            return (x + y) % 3
        return (x + y + z) % 2

    @property
    def n_colours(self) -> int:
        return 3 if self.kind == "triangular" else 2

    def row_sites(self, row: int, colour: int) -> list[int]:
        """Sites of ``colour`` in row ``row`` (rows in (z, y) order), in increasing x."""
        key = (row, colour)
        if key not in self._rows:
            y, z = row % self.ny, row // self.ny
            sites = [self.index(x, y, z) for x in range(self.nx)]
            self._rows[key] = [i for i in sites if self.colour(i) == colour]
        return self._rows[key]


_GEOMETRIES: dict = {}


def _geometry(lattice) -> Geometry:
    """A cached Geometry (the lattice's kind, size and boundary are its key)."""
    key = (lattice.kind, tuple(lattice.size), lattice.boundary)
    if key not in _GEOMETRIES:
        _GEOMETRIES[key] = Geometry(lattice)
    return _GEOMETRIES[key]


def bond_sum(spins_flat, geometry: Geometry) -> int:
    """Sum over bonds of s_i s_j by an explicit loop (each bond once)."""
    s = [int(v) for v in spins_flat]
    total = 0
    for i in range(geometry.n_sites):
        for j in geometry.present[i]:
            total += s[i] * s[j]
    assert total % 2 == 0  # every bond was seen from both ends
    return total // 2


def energy_per_site(spins, lattice, J: float = 1.0, h: float = 0.0) -> np.ndarray:
    """(-J sum_bonds s_i s_j - h sum_i s_i) / N for each replica of ``spins`` (R, *shape)."""
    geometry = _geometry(lattice)
    out = []
    for replica in np.asarray(spins).reshape(len(spins), -1):
        b = bond_sum(replica, geometry)
        m = int(sum(int(v) for v in replica))
        out.append((-J * b - h * m) / geometry.n_sites)
    return np.array(out)


def _local_bonds(s: list[int], sites, geometry: Geometry) -> int:
    """Sum of s_i s_j over the bonds touching ``sites``, each bond once."""
    seen = set()
    total = 0
    for i in sites:
        for j in geometry.present[i]:
            key = (min(i, j), max(i, j))
            if key not in seen:
                seen.add(key)
                total += s[i] * s[j]
    return total


# --------------------------------------------------------------------------------------------
# one sweep of each dynamics
# --------------------------------------------------------------------------------------------
def _field(s, site, geometry):
    return sum(s[j] for j in geometry.present[site])


def _glauber_decision(word, old, field, table, z):
    """The new spin: ``old`` flips when the word's top 31 bits are at most its threshold."""
    row = 0 if old == -1 else 1
    return -old if (word >> 1) <= table[row][field + z] else old


def _site_attempts(stream: Stream, geometry: Geometry, per: int):
    """Yield ``(site, words)`` for the N attempts of one random-sequential sweep.

    Each attempt takes ``per`` words: one per coordinate (x first), then the rule's own
    words. Words are drawn in blocks of 256 attempts, the leftover discarded at sweep end.
    """
    d = geometry.dimension
    axes = (geometry.nx, geometry.ny, geometry.nz)
    remaining = geometry.n_sites
    while remaining > 0:
        count = min(ATTEMPTS_PER_BLOCK, remaining)
        words = stream.words(_draws_for(count * per))
        for k in range(count):
            w = words[k * per:(k + 1) * per]
            c = [scale(w[i], axes[i]) for i in range(d)] + [0, 0]
            yield geometry.index(c[0], c[1], c[2]), w[d:]
        remaining -= count


def glauber_sweep(s: list[int], stream: Stream, geometry: Geometry, table) -> int:
    """One random-sequential Glauber sweep; ``table[row][field + z]`` are flip thresholds."""
    changed = 0
    for site, w in _site_attempts(stream, geometry, geometry.dimension + 1):
        old = s[site]
        new = _glauber_decision(w[0], old, _field(s, site, geometry), table, geometry.z)
        changed += new != old
        s[site] = new
    return changed


def _exchange_q(s, a, b, geometry):
    """q with energy change 2 J q for swapping the spins of a and b, by brute force."""
    before = _local_bonds(s, (a, b), geometry)
    s[a], s[b] = s[b], s[a]
    after = _local_bonds(s, (a, b), geometry)
    s[a], s[b] = s[b], s[a]
    # E = -J * bonds, so dE = -J (after - before) = 2 J q.
    assert (after - before) % 2 == 0
    return -(after - before) // 2


def kawasaki_local_sweep(s: list[int], stream: Stream, geometry: Geometry, table) -> int:
    """One sweep of nearest-neighbour exchanges; ``table[q + 2 z]`` are thresholds."""
    z = geometry.z
    moves = 0
    for a, w in _site_attempts(stream, geometry, geometry.dimension + 2):
        b = geometry.full[a][scale(w[0], z)]
        if b is None or s[a] == s[b]:
            continue
        q = _exchange_q(s, a, b, geometry)
        if (w[1] >> 1) <= table[q + 2 * z]:
            s[a], s[b] = s[b], s[a]
            moves += 1
    return moves


def kawasaki_nonlocal_sweep(s: list[int], stream: Stream, geometry: Geometry, table,
                            ups: list[int], downs: list[int]) -> int:
    """One sweep of up/down exchanges anywhere; ``ups``/``downs`` are updated in place."""
    z = geometry.z
    moves = 0
    remaining = geometry.n_sites
    while remaining > 0:
        count = min(ATTEMPTS_PER_BLOCK, remaining)
        words = stream.words(_draws_for(3 * count))
        remaining -= count
        if not ups or not downs:
            continue
        for k in range(count):
            iu = scale(words[3 * k], len(ups))
            idn = scale(words[3 * k + 1], len(downs))
            a, b = ups[iu], downs[idn]
            assert s[a] == 1 and s[b] == -1
            q = _exchange_q(s, a, b, geometry)
            if (words[3 * k + 2] >> 1) <= table[q + 2 * z]:
                s[a], s[b] = -1, 1
                ups[iu], downs[idn] = b, a
                moves += 1
    return moves


def row_blocks(rows: int) -> list[tuple[int, int]]:
    """Row blocks of the sublattice update: min(rows, 64) near-equal runs of rows."""
    n = min(rows, MAX_ROW_BLOCKS)
    edges = [(b * rows) // n for b in range(n + 1)]
    return [(edges[b], edges[b + 1]) for b in range(n)]


def checkerboard_sweep(s: list[int], streams: list[Stream], geometry: Geometry, table) -> int:
    """One sublattice sweep: every site of colour 0, then 1 (then 2 on the triangular lattice)."""
    rows = geometry.ny * geometry.nz
    blocks = row_blocks(rows)
    assert len(blocks) == len(streams)
    changed = 0
    for c in range(geometry.n_colours):
        for (first, stop), stream in zip(blocks, streams):
            for row in range(first, stop):
                sites = geometry.row_sites(row, c)
                words = stream.words(_draws_for(len(sites)))
                for m, site in enumerate(sites):
                    old = s[site]
                    new = _glauber_decision(words[m], old, _field(s, site, geometry), table,
                                            geometry.z)
                    changed += new != old
                    s[site] = new
    return changed


# --------------------------------------------------------------------------------------------
# the twin of coarsen.engine.advance
# --------------------------------------------------------------------------------------------
def advance(spins, streams, lattice, sweeps, temperature, *, rule="glauber",
            acceptance="heat-bath", update="random", J=1.0, h=0.0) -> np.ndarray:
    """Advance ``spins`` (R, *shape) int8 and ``streams`` (R, S, 64) uint64 in place.

    Returns the accepted moves per replica. Nonlocal Kawasaki builds its up and down lists
    in site order at the start of every sweep, as the kernel documents.
    """
    geometry = _geometry(lattice)
    temps = np.atleast_1d(np.asarray(temperature, dtype=float))
    z = geometry.z
    tables = {}

    def table_for(t):
        T = float(temps[min(t, len(temps) - 1)])
        if T not in tables:
            if rule == "glauber":
                p = flip_probabilities(T, z, J, h, acceptance)
                tables[T] = [[threshold(v) for v in row] for row in p]
            else:
                p = exchange_probabilities(T, z, J, acceptance)
                tables[T] = [threshold(v) for v in p]
        return tables[T]

    moves = np.zeros(spins.shape[0], dtype=np.int64)
    for r in range(spins.shape[0]):
        s = [int(v) for v in spins[r].ravel()]
        subs = [Stream(streams[r, b]) for b in range(streams.shape[1])]
        for t in range(sweeps):
            table = table_for(t)
            # the nonlocal kernel lists up and down spins in site order at every sweep
            ups = [i for i in range(len(s)) if s[i] == 1]
            downs = [i for i in range(len(s)) if s[i] == -1]
            if rule == "glauber" and update == "random":
                moves[r] += glauber_sweep(s, subs[0], geometry, table)
            elif rule == "glauber":
                moves[r] += checkerboard_sweep(s, subs, geometry, table)
            elif rule == "kawasaki":
                moves[r] += kawasaki_local_sweep(s, subs[0], geometry, table)
            else:
                moves[r] += kawasaki_nonlocal_sweep(s, subs[0], geometry, table, ups, downs)
        spins[r] = np.array(s, dtype=np.int8).reshape(spins.shape[1:])
        for b, sub in enumerate(subs):
            streams[r, b] = sub.state()
    return moves


# --------------------------------------------------------------------------------------------
# a vectorised twin of the checkerboard sweep, for lattices too large for the loops above
# --------------------------------------------------------------------------------------------
class StreamBank:
    """Many streams advanced in lock step with NumPy: ``states`` has shape (S, 64), uint64.

    ``draw(active)`` advances the streams where ``active`` is True and returns their 32 words
    per draw, shape (S, 32) (rows of inactive streams are meaningless). Same recurrence as
    :func:`xoshiro_next`, on whole arrays; uint64 arithmetic wraps modulo 2**64.
    """

    def __init__(self, states):
        s = np.array(states, dtype=np.uint64).reshape(-1, 4, LANES)
        self.s = [s[:, j].copy() for j in range(4)]  # each (S, 16)

    @staticmethod
    def _rotl(x, k):
        return (x << np.uint64(k)) | (x >> np.uint64(64 - k))

    def draw(self, active) -> np.ndarray:
        s0, s1, s2, s3 = self.s
        out = self._rotl(s1 * np.uint64(5), 7) * np.uint64(9)
        t = s1 << np.uint64(17)
        n2 = s2 ^ s0
        n3 = s3 ^ s1
        n1 = s1 ^ n2
        n0 = s0 ^ n3
        n2 = n2 ^ t
        n3 = self._rotl(n3, 45)
        keep = np.asarray(active)[:, None]
        self.s = [np.where(keep, new, old) for new, old in zip((n0, n1, n2, n3), self.s)]
        words = np.empty((out.shape[0], 2 * LANES), dtype=np.uint64)
        words[:, 0::2] = out & np.uint64(MASK32)
        words[:, 1::2] = out >> np.uint64(32)
        return words

    def states(self) -> np.ndarray:
        return np.stack(self.s, axis=1).reshape(-1, 4 * LANES)


def _neighbour_spin(spins3, offset, periodic):
    """Array of the spin at site + offset (0 across an open edge); ``spins3`` is (nz, ny, nx)."""
    out = spins3
    for axis, step in zip((2, 1, 0), offset):  # offsets are (x, y, z)
        if step == 0:
            continue
        out = np.roll(out, -step, axis=axis)
        if not periodic:
            out = out.copy()
            index = [slice(None)] * 3
            index[axis] = slice(-step, None) if step > 0 else slice(None, -step)
            out[tuple(index)] = 0
    return out


def checkerboard_sweeps_numpy(spins, streams, lattice, table):
    """One checkerboard sweep of every replica, vectorised; same words as checkerboard_sweep.

    ``spins`` (R, *shape) int8 and ``streams`` (R, S, 64) are modified in place; ``table`` is
    the (2, 2 z + 1) integer threshold array. Each colour is updated at once, which is exact
    because no bond joins two sites of one colour. Returns the changed spins per replica.
    """
    geometry_size = tuple(lattice.size) + (1, 1)
    nx, ny, nz = geometry_size[:3]
    periodic = lattice.boundary == "periodic"
    rows = ny * nz
    offsets = OFFSETS[lattice.kind]
    z = len(offsets)
    zz, yy, xx = np.indices((nz, ny, nx))
    colours = (xx + yy) % 3 if lattice.kind == "triangular" else (xx + yy + zz) % 2
    n_colours = 3 if lattice.kind == "triangular" else 2
    blocks = row_blocks(rows)
    longest = max(stop - first for first, stop in blocks)
    table = np.asarray(table, dtype=np.int64)
    changed = np.zeros(spins.shape[0], dtype=np.int64)
    for r in range(spins.shape[0]):
        s = spins[r].reshape(nz, ny, nx).astype(np.int64)
        bank = StreamBank(streams[r])
        for c in range(n_colours):
            mask = colours == c
            per_row = int(mask.reshape(rows, nx).sum(axis=1)[0])
            assert np.all(mask.reshape(rows, nx).sum(axis=1) == per_row)
            draws = _draws_for(per_row)
            row_words = np.zeros((rows, draws * 2 * LANES), dtype=np.uint64)
            for j in range(longest):  # j-th row of every block, all blocks at once
                active = np.array([first + j < stop for first, stop in blocks])
                row_of = np.array([first + j for first, _ in blocks])
                for k in range(draws):
                    words = bank.draw(active)
                    row_words[row_of[active], k * 2 * LANES:(k + 1) * 2 * LANES] = words[active]
            # site (row, x) of this colour takes word m = its rank among the row's sites
            w = row_words[:, :per_row].ravel()  # row-major: matches np.nonzero order below
            field = sum(_neighbour_spin(s, off, periodic) for off in offsets)
            old = s[mask]
            thr = table[(old + 1) // 2, field[mask] + z]
            new = np.where((w >> np.uint64(1)).astype(np.int64) <= thr, -old, old)
            changed[r] += int(np.count_nonzero(new != old))
            s[mask] = new
        spins[r] = s.reshape(spins.shape[1:]).astype(np.int8)
        streams[r] = bank.states()
    return changed


# --------------------------------------------------------------------------------------------
# observables: S(k) by direct summation, C(r) by pair loops, domains by breadth-first search
# --------------------------------------------------------------------------------------------
# Written from the definitions in shared/DESIGN.md and the observables issue: sites at
# r = x a_x + y a_y + z a_z (triangular: a_x = (1, 0), a_y = (-1/2, sqrt 3 / 2)); wavevectors
# of the discrete Fourier grid k = sum_a (2 pi m_a / L_a) b_a with b the reciprocal basis
# (a_a . b_c = delta_ac); |k| the shortest equivalent wavevector, |d| the shortest periodic
# image; shells of width 2 pi / extent and unit distance bins, "extent" the length of the
# shortest translation of the box by whole periods. Nothing here imports coarsen.observables.

import collections  # noqa: E402
import itertools  # noqa: E402

__all__ += [
    "LATTICE_VECTORS",
    "correlation_pairs",
    "domains_bfs",
    "radial_correlation_pairs",
    "radial_structure_factor_direct",
    "structure_factor_direct",
]

#: Lattice vectors a_x, a_y, a_z (rows) in Cartesian coordinates.
LATTICE_VECTORS = {
    "chain": np.array([[1.0]]),
    "square": np.eye(2),
    "triangular": np.array([[1.0, 0.0], [-0.5, math.sqrt(3.0) / 2.0]]),
    "cubic": np.eye(3),
}

_EDGE = 1e-9  # a length on a shell or bin edge goes to the upper one


def _coordinates(size) -> np.ndarray:
    """(N, d) integer site coordinates (x, y, z) of the flat C-order sites of shape size[::-1]."""
    grids = np.meshgrid(*[np.arange(n) for n in size], indexing="ij")  # (x, y, z) order
    coords = np.stack([g.ravel() for g in grids], axis=1)
    flat = np.zeros(len(coords), dtype=np.int64)
    stride = 1
    for axis, n in enumerate(size):
        flat += coords[:, axis] * stride
        stride *= n
    out = np.empty_like(coords)
    out[flat] = coords
    return out


def _images(d: int, reach: int = 2):
    return [np.array(n) for n in itertools.product(range(-reach, reach + 1), repeat=d)]


def _extent(kind, size) -> float:
    vectors = LATTICE_VECTORS[kind]
    size = np.array(size, dtype=float)
    return min(float(np.linalg.norm((n * size) @ vectors))
               for n in _images(len(size)) if np.any(n))


def _reciprocal(kind) -> np.ndarray:
    """Rows b_a with a_a . b_c = delta_ac."""
    return np.linalg.inv(LATTICE_VECTORS[kind]).T


def _present(size, mask) -> np.ndarray:
    n = math.prod(size)
    return np.ones(n, dtype=bool) if mask is None else np.asarray(mask).ravel().astype(bool)


def structure_factor_direct(spins, kind: str, size, mask=None) -> np.ndarray:
    """S(k) = |sum over present j of s_j exp(i k . r_j)|**2 / N_present for every wavevector
    of the Fourier grid: ndarray (R, *size[::-1]) indexed [r, m_z, m_y, m_x]."""
    size = tuple(size)
    d = len(size)
    coords = _coordinates(size)
    present = _present(size, mask)
    positions = coords @ LATTICE_VECTORS[kind]
    m = _coordinates(size)  # the integer wavevector indices, same enumeration
    k = (2 * np.pi * m / np.array(size)) @ _reciprocal(kind)
    phase = np.exp(1j * (k @ positions[present].T))  # (N_k, N_present)
    s = np.asarray(spins, dtype=float).reshape(len(spins), -1)[:, present]
    amplitude = s @ phase.T
    out = np.abs(amplitude) ** 2 / present.sum()
    return out.reshape(len(spins), *size[::-1])


def _wavevector_lengths(kind, size) -> np.ndarray:
    """|k| of the flat grid wavevectors, shortest over reciprocal-lattice translations."""
    m = _coordinates(tuple(size))
    recip = _reciprocal(kind)
    k = (2 * np.pi * m / np.array(size)) @ recip
    shifts = [2 * np.pi * (n @ recip) for n in _images(len(size))]
    return np.min([np.linalg.norm(k + g, axis=1) for g in shifts], axis=0)


def radial_structure_factor_direct(spins, kind: str, size, mask=None):
    """Shell means of the direct-sum S(k): (shell centres, values (R, n_shells)), non-empty
    shells of width 2 pi / extent, wavevector in shell floor(|k| / dk + 1/2)."""
    s = structure_factor_direct(spins, kind, size, mask).reshape(len(spins), -1)
    dk = 2 * np.pi / _extent(kind, size)
    shell = np.floor(_wavevector_lengths(kind, size) / dk + 0.5 + _EDGE).astype(int)
    centres = np.unique(shell)
    values = np.stack([s[:, shell == c].mean(axis=1) for c in centres], axis=1)
    return centres * dk, values


def _pair_table(spins, kind, size, periodic, mask):
    """Every ordered pair (i, j) of present sites: displacement key (tuple), length, s_i s_j."""
    size = tuple(size)
    coords = _coordinates(size)
    present = np.flatnonzero(_present(size, mask))
    vectors = LATTICE_VECTORS[kind]
    s = np.asarray(spins, dtype=float).reshape(len(spins), -1)
    i, j = np.meshgrid(present, present, indexing="ij")
    i, j = i.ravel(), j.ravel()
    delta = coords[j] - coords[i]
    if periodic:
        key = delta % np.array(size)
        lengths = np.min([np.linalg.norm((delta + n * np.array(size)) @ vectors, axis=1)
                          for n in _images(len(size))], axis=0)
    else:
        key = delta % (2 * np.array(size) - 1)
        lengths = np.linalg.norm(delta @ vectors, axis=1)
    return key, lengths, s[:, i] * s[:, j]


def correlation_pairs(spins, kind: str, size, periodic: bool = True, mask=None) -> np.ndarray:
    """C(d) = mean of s_i s_(i+d) over the ordered pairs of present sites at displacement d.

    Returns ndarray (R, *shape) with shape = size[::-1] (periodic, index d mod L) or
    (2 L - 1)[::-1] (open, index d mod (2 L - 1)); NaN where no pair has that displacement.
    """
    size = tuple(size)
    key, _, products = _pair_table(spins, kind, size, periodic, mask)
    dims = np.array(size) if periodic else 2 * np.array(size) - 1
    flat = np.zeros(len(key), dtype=np.int64)
    stride = 1
    for axis, n in enumerate(dims):
        flat += key[:, axis] * stride
        stride *= n
    total = np.zeros((len(spins), stride))
    count = np.zeros(stride)
    np.add.at(count, flat, 1.0)
    for r in range(len(spins)):
        np.add.at(total[r], flat, products[r])
    with np.errstate(invalid="ignore"):
        out = np.where(count > 0, total / count, np.nan)
    return out.reshape(len(spins), *dims[::-1])


def radial_correlation_pairs(spins, kind: str, size, periodic: bool = True, mask=None):
    """Bin means of s_i s_j over ordered pairs: (bin centres, values (R, n_bins)); bins of
    width 1 centred on 0 .. floor(extent / 2), pair in bin floor(|d| + 1/2), farther pairs out."""
    key, lengths, products = _pair_table(spins, kind, size, periodic, mask)
    n_bins = int(math.floor(_extent(kind, size) / 2)) + 1
    b = np.floor(lengths + 0.5 + _EDGE).astype(int)
    use = lengths < n_bins - 0.5
    centres = np.unique(b[use])
    values = np.stack([products[:, use & (b == c)].mean(axis=1) for c in centres], axis=1)
    return centres.astype(float), values


def domains_bfs(spins_one, kind: str, size, periodic: bool = True, mask=None) -> np.ndarray:
    """Domains of one configuration by breadth-first search over equal-sign neighbours.

    Neighbours from ``OFFSETS`` (wrapped on a torus, dropped across open edges); masked sites
    get label 0 and join nothing. Returns labels 1..n in the shape size[::-1].
    """
    size = tuple(size)
    n = math.prod(size)
    coords = _coordinates(size)
    present = _present(size, mask)
    s = np.asarray(spins_one).ravel()
    strides = [math.prod(size[:a]) for a in range(len(size))]
    labels = np.zeros(n, dtype=np.int64)
    current = 0
    for start in range(n):
        if not present[start] or labels[start]:
            continue
        current += 1
        labels[start] = current
        queue = collections.deque([start])
        while queue:
            site = queue.popleft()
            for off in OFFSETS[kind]:
                target = coords[site] + np.array(off[: len(size)])
                if periodic:
                    target %= np.array(size)
                elif np.any(target < 0) or np.any(target >= np.array(size)):
                    continue
                other = int(sum(int(t) * st for t, st in zip(target, strides)))
                if present[other] and not labels[other] and s[other] == s[site]:
                    labels[other] = current
                    queue.append(other)
    return labels.reshape(size[::-1])


# Domains with well-kept libraries: scipy.ndimage.label once per sign (structuring element
# from OFFSETS, no wrapping), then every bond of OFFSETS, wrapped on a torus, joins the two
# labels it touches (scipy.sparse.csgraph.connected_components). This was the package's own
# labelling before the union-find kernel of coarsen/kernels/domains.py replaced it.
__all__ += ["domains_scipy"]


def domains_scipy(spins_one, kind: str, size, periodic: bool = True, mask=None) -> np.ndarray:
    """Domains of one configuration by scipy labelling plus a merge over all bonds.

    Same conventions as :func:`domains_bfs`: labels 1..n in the shape size[::-1], 0 for
    masked sites and sites of value 0.
    """
    from scipy import ndimage, sparse
    from scipy.sparse import csgraph

    size = tuple(size)
    d = len(size)
    shape = size[::-1]
    s = np.asarray(spins_one).reshape(shape)
    present = np.ones(shape, dtype=bool) if mask is None else np.asarray(mask, dtype=bool)
    structure = np.zeros((3,) * d, dtype=bool)
    structure[(1,) * d] = True
    for off in OFFSETS[kind]:
        structure[tuple(1 + c for c in off[:d][::-1])] = True
    labels = np.zeros(shape, dtype=np.int64)
    n = 0
    for sign_is_up in (True, False):
        sites = ((s > 0) if sign_is_up else (s < 0)) & present
        part, count = ndimage.label(sites, structure=structure)
        labels[sites] = part[sites] + n
        n += count
    if n == 0:
        return labels
    ends_a, ends_b = [], []
    for off in OFFSETS[kind]:
        step = off[:d][::-1]  # array axes (z, y, x)
        moved = np.roll(labels, shift=tuple(-c for c in step), axis=tuple(range(d)))
        valid = np.ones(shape, dtype=bool)
        if not periodic:  # drop bonds that cross an open edge
            for axis, c in enumerate(step):
                index = [slice(None)] * d
                if c > 0:
                    index[axis] = slice(shape[axis] - c, None)
                elif c < 0:
                    index[axis] = slice(0, -c)
                if c:
                    valid[tuple(index)] = False
        same = valid & (labels > 0) & (moved > 0) & (s * np.roll(s, tuple(-c for c in step),
                                                                axis=tuple(range(d))) > 0)
        ends_a.append(labels[same] - 1)
        ends_b.append(moved[same] - 1)
    a, b = np.concatenate(ends_a), np.concatenate(ends_b)
    graph = sparse.coo_matrix((np.ones(len(a)), (a, b)), shape=(n, n))
    _, component = csgraph.connected_components(graph, directed=False)
    # number the components 1.. in the order of their first site
    flat = labels.ravel()
    merged = np.zeros_like(flat)
    merged[flat > 0] = component[flat[flat > 0] - 1] + 1
    _, first = np.unique(merged[merged > 0], return_index=True)
    order = np.argsort(first)
    renumber = np.zeros(merged.max() + 1, dtype=np.int64)
    renumber[np.unique(merged[merged > 0])[order]] = np.arange(1, len(order) + 1)
    return renumber[merged].reshape(shape)
