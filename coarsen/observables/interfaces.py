"""Interface positions along cuts through a seeded domain.

A *cut* is a ray on the square lattice: an origin inside the seeded (down) domain, a unit
direction and a length, all in lattice spacings and (x, y) order. Along it the order parameter
is coarse-grained and the interface position is the distance from the origin to where that
coarse-grained profile first reaches zero: how far the down domain extends along the cut.

Coarse-graining
---------------
The profile is sampled at the points ``origin + s * direction``, s = 0, 1, 2, ... up to the
length. At each point the value is the bilinear interpolation, between the four surrounding
sites, of the mean of the field over the ``width x width`` block of sites centred on each of
them (``width`` odd, default 5: a band ``width`` sites wide across the cut, smoothed over the
same distance along it). The position is the first s where the profile is >= 0, linearly
interpolated between that sample and the one before; 0 when the profile starts at or above
zero (no down phase at the origin: the domain has gone), NaN when it never gets there within
the cut (or before the cut leaves an open lattice). A step between a down and an up
half-plane gives zero exactly half way between the last down and the first up site, and a
thermal flip inside a domain changes a block mean by only ``2 / width**2``, so at low
temperatures the position moves only with the interface itself. Block means use the sites
inside the lattice only (open edges) or wrap around (periodic).

Default cuts of the seeded states (centre c, lattice size n_x, n_y)
-------------------------------------------------------------------
``disk``
    8 rays from the centre at 0, 45, ..., 315 degrees (kind ``radial``), length
    ``min(n_x, n_y) / 2``: the position is the radius along that direction.
``square``
    The same 8 rays; kinds ``face`` (0, 90, 180, 270 degrees, normal to a side) and
    ``corner`` (the diagonals).
``stripe``
    Rays from ``(c_x, y)`` along +x and -x, at y = c_y + j n_y / 4, j = 0..3 (periodic; on
    open lattices y = (j + 1/2) n_y / 4 - 1/2, away from the edges) (kind ``flat``), length
    ``n_x / 2``: the position is the distance of each interface from the
    stripe's middle.
``zigzag``
    Columns along +y at the apexes (x = c_x + k P), the troughs (x = c_x + (k + 1/2) P) and
    the flat middles between them (x = c_x + (k +- 1/4) P) of the first four periods P
    (kinds ``apex``, ``trough``, ``middle``), from y0 = (c_y - A) / 2, half way between the
    edge y = 0 and the lowest point of the line, to the top row: the position plus y0 is the
    height of the interface in that column.

The file state has no default cuts; cuts given in the spec (``measure.cuts``) replace the
defaults, for any initial state.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from coarsen._validation import ParameterError, ParameterTypeError, check_integer, check_number
from coarsen.lattice import Lattice
from coarsen.observables._checks import check_stack

__all__ = [
    "CUT_KEYS",
    "DEFAULT_CUT_WIDTH",
    "Cut",
    "check_cut_width",
    "cut_coordinates",
    "default_cuts",
    "interface_positions",
    "parse_cuts",
]

#: Width (sites) of the band the profile along a cut is averaged over.
DEFAULT_CUT_WIDTH = 5
#: Keys of one cut in the spec's ``measure.cuts`` list.
CUT_KEYS = ("origin", "direction", "length", "label")
#: Largest number of periods of a zigzag with default cuts (4 cuts per period).
_ZIGZAG_PERIODS = 4


@dataclass(frozen=True)
class Cut:
    """One cut: a ray along which the interface position is measured.

    Attributes
    ----------
    label : str
        Its name (the ``cut`` coordinate of the dataset).
    kind : str
        ``radial``, ``face``, ``corner``, ``flat``, ``apex``, ``trough``, ``middle`` for the
        defaults, ``custom`` for cuts given in the spec.
    origin : tuple of float
        (x, y) in lattice spacings.
    direction : tuple of float
        Unit vector (x, y).
    length : float
        How far along the ray to look, in lattice spacings.
    """

    label: str
    kind: str
    origin: tuple[float, float]
    direction: tuple[float, float]
    length: float


def _need_square(lattice: Lattice, name: str) -> None:
    if lattice.kind != "square":
        raise ParameterError(f"{name}: interface cuts are measured on square lattices only, "
                             f"not on a {lattice.kind} lattice", name=name, value=lattice.kind)


def _ray(label, kind, origin, angle_degrees, length) -> Cut:
    angle = math.radians(angle_degrees)
    direction = (round(math.cos(angle), 15) + 0.0, round(math.sin(angle), 15) + 0.0)
    return Cut(label, kind, (float(origin[0]), float(origin[1])), direction, float(length))


def default_cuts(state: str, lattice: Lattice, parameters: dict) -> tuple[Cut, ...]:
    """The default cuts of a seeded state (see the module notes); () where there are none.

    Parameters
    ----------
    state : str
        The initial state (``disk``, ``square``, ``stripe``, ``zigzag``; others get none).
    lattice : Lattice
        Cuts exist on square lattices only; other kinds get none.
    parameters : dict
        The state's parameters (:data:`coarsen.seeded.SEEDED_PARAMETERS`).
    """
    from coarsen.seeded import seed_centre

    if lattice.kind != "square" or state not in ("disk", "square", "stripe", "zigzag"):
        return ()
    nx, ny = lattice.size
    cx, cy = seed_centre(lattice, parameters.get("centre")).tolist()
    if state in ("disk", "square"):
        cuts = []
        for angle in range(0, 360, 45):
            kind = "radial" if state == "disk" else ("face" if angle % 90 == 0 else "corner")
            cuts.append(_ray(f"{kind} {angle} deg", kind, (cx, cy), angle, min(nx, ny) / 2))
        return tuple(cuts)
    if state == "stripe":
        cuts = []
        for j in range(4):
            # rows a quarter of the lattice apart; on open lattices none on an edge
            y = (cy + j * ny / 4) % ny if lattice.periodic else (j + 0.5) * ny / 4 - 0.5
            for sign, angle in (("+", 0), ("-", 180)):
                cuts.append(_ray(f"{sign}x y={y:g}", "flat", (cx, y), angle, nx / 2))
        return tuple(cuts)
    period = float(parameters["period"])
    amplitude = float(parameters["amplitude"])
    y0 = max(0.0, (cy - amplitude) / 2.0)
    periods = min(_ZIGZAG_PERIODS, max(1, int(round(nx / period))))
    cuts = []
    for k in range(periods):
        for quarter, kind in ((0, "apex"), (1, "middle"), (2, "trough"), (3, "middle")):
            x = (cx + (k + quarter / 4.0) * period) % nx
            if not lattice.periodic and x > nx - 1:
                continue  # past the open edge
            cuts.append(_ray(f"{kind} x={x:g}", kind, (x, y0), 90, ny - 1 - y0))
    return tuple(cuts)


def parse_cuts(value, lattice: Lattice, name: str = "measure.cuts") -> tuple[Cut, ...]:
    """Validate cuts given as a list of tables ``{ origin, direction, length, label }``.

    ``origin = [x, y]`` (inside the lattice) and ``direction = [dx, dy]`` (not zero;
    normalised here) are required; ``length`` (> 0) defaults to half the smaller lattice
    size, ``label`` to ``"cut <i>"``.

    Raises
    ------
    ParameterError
        Naming ``measure.cuts`` (and the entry and key) and what is wrong.
    """
    _need_square(lattice, name)
    if not isinstance(value, list) or not value:
        raise ParameterTypeError(
            f"{name}: {value!r} is not a list of cuts; give e.g. [{{ origin = [32, 32], "
            "direction = [1, 0] }]", name=name, value=value)
    cuts, labels = [], set()
    for i, entry in enumerate(value):
        where = f"{name}[{i}]"
        if not isinstance(entry, dict):
            raise ParameterTypeError(f"{where}: {entry!r} is not a table with keys "
                                     f"{', '.join(CUT_KEYS)}", name=name, value=entry)
        for key in entry:
            if key not in CUT_KEYS:
                raise ParameterError(f"{where}.{key}: unknown key; a cut takes "
                                     f"{', '.join(CUT_KEYS)}", name=name, value=entry,
                                     allowed=CUT_KEYS)
        for key in ("origin", "direction"):
            if key not in entry:
                raise ParameterError(f"{where}.{key}: missing; a cut needs origin = [x, y] "
                                     "and direction = [dx, dy]", name=name, value=entry)
        origin = _pair(entry["origin"], f"{where}.origin", name)
        for c, n in zip(origin, lattice.size):
            if not 0.0 <= c <= n - 1:
                raise ParameterError(f"{where}.origin: {entry['origin']!r} lies outside the "
                                     f"lattice (0 to size - 1, size {list(lattice.size)})",
                                     name=name, value=entry)
        direction = _pair(entry["direction"], f"{where}.direction", name)
        norm = math.hypot(*direction)
        if norm == 0.0:
            raise ParameterError(f"{where}.direction: [0, 0] has no direction", name=name,
                                 value=entry)
        length = check_number(entry.get("length", min(lattice.size) / 2), f"{where}.length",
                              minimum=0.0, strict_minimum=True, what="length in lattice "
                              "spacings")
        label = entry.get("label", f"cut {i}")
        if not isinstance(label, str) or not label:
            raise ParameterTypeError(f"{where}.label: {label!r} is not a non-empty string",
                                     name=name, value=entry)
        if label in labels:
            raise ParameterError(f"{where}.label: {label!r} is used twice; labels name the "
                                 "cuts and must differ", name=name, value=entry)
        labels.add(label)
        cuts.append(Cut(label, "custom", origin, (direction[0] / norm, direction[1] / norm),
                        float(length)))
    return tuple(cuts)


def _pair(value, where: str, name: str) -> tuple[float, float]:
    if not isinstance(value, (list, tuple)) or len(value) != 2:
        raise ParameterTypeError(f"{where}: {value!r} is not a pair of numbers [x, y]",
                                 name=name, value=value)
    x, y = (check_number(v, where) for v in value)
    return (float(x), float(y))


def check_cut_width(value, name: str = "measure.cut_width") -> int:
    """The band width: an odd whole number of sites >= 1."""
    width = check_integer(value, name, minimum=1, what="odd number of sites")
    if width % 2 == 0:
        raise ParameterError(f"{name}: {width!r} is even; give an odd number of sites so the "
                             "band is centred on the cut", name=name, value=value)
    return width


def cut_coordinates(cuts) -> dict:
    """The dataset coordinates of the cuts: ``name -> (dims, values, units, long_name)``."""
    cuts = tuple(cuts)
    return {
        "cut": (("cut",), np.array([c.label for c in cuts]), "1", "interface cut"),
        "cut_kind": (("cut",), np.array([c.kind for c in cuts]), "1",
                     "kind of cut (radial, face, corner, flat, apex, trough, middle, custom)"),
        "cut_origin_x": (("cut",), np.array([c.origin[0] for c in cuts]),
                         "lattice spacings", "x of the cut's origin"),
        "cut_origin_y": (("cut",), np.array([c.origin[1] for c in cuts]),
                         "lattice spacings", "y of the cut's origin"),
        "cut_direction_x": (("cut",), np.array([c.direction[0] for c in cuts]), "1",
                            "x component of the cut's unit direction"),
        "cut_direction_y": (("cut",), np.array([c.direction[1] for c in cuts]), "1",
                            "y component of the cut's unit direction"),
        "cut_length": (("cut",), np.array([c.length for c in cuts]), "lattice spacings",
                       "length of the cut"),
    }


def interface_positions(spins: np.ndarray, lattice: Lattice, cuts,
                        width: int = DEFAULT_CUT_WIDTH) -> np.ndarray:
    """Interface position along each cut of each configuration.

    Parameters
    ----------
    spins : ndarray of shape (R, n_y, n_x)
        Configurations of +1/-1 (the staggered field for Neel order), square lattice.
    lattice : Lattice
    cuts : sequence of Cut
    width : int, default: 5
        Odd band width in sites (module notes).

    Returns
    -------
    ndarray of shape (len(cuts), R), float64
        Distance from each cut's origin to the first zero of the coarse-grained profile
        (0 if it starts at or above zero, NaN if it never reaches zero on the cut).
    """
    _need_square(lattice, "lattice")
    check_stack(spins, lattice)
    width = check_cut_width(width, "width")
    cuts = tuple(cuts)
    reps = spins.shape[0]
    if not cuts:
        return np.zeros((0, reps))
    profile = _profiles(np.asarray(spins), lattice, cuts, width)  # (R, cuts, samples)
    return _first_zero(profile).T


def _profiles(spins, lattice: Lattice, cuts, width: int) -> np.ndarray:
    nx, ny = lattice.size
    n_samples = max(int(math.floor(c.length + 1e-9)) for c in cuts) + 1
    s = np.arange(n_samples, dtype=np.float64)
    origin = np.array([c.origin for c in cuts])
    direction = np.array([c.direction for c in cuts])
    used = s[np.newaxis] <= np.array([c.length for c in cuts])[:, np.newaxis] + 1e-9
    px = origin[:, :1] + s * direction[:, :1]
    py = origin[:, 1:] + s * direction[:, 1:]
    x0, y0 = np.floor(px), np.floor(py)
    fx, fy = px - x0, py - y0
    x0, y0 = x0.astype(np.int64), y0.astype(np.int64)
    half = width // 2
    periodic = lattice.periodic
    reps = spins.shape[0]
    value = np.zeros((reps,) + px.shape)
    for ix, iy, weight in ((0, 0, (1 - fx) * (1 - fy)), (1, 0, fx * (1 - fy)),
                           (0, 1, (1 - fx) * fy), (1, 1, fx * fy)):
        cx, cy = x0 + ix, y0 + iy
        total = np.zeros((reps,) + px.shape)
        count = np.zeros(px.shape)
        for dy in range(-half, half + 1):
            yy = cy + dy
            for dx in range(-half, half + 1):
                xx = cx + dx
                if periodic:
                    total += spins[:, yy % ny, xx % nx]
                    count += 1
                else:
                    inside = (xx >= 0) & (xx < nx) & (yy >= 0) & (yy < ny)
                    total += np.where(inside, spins[:, np.clip(yy, 0, ny - 1),
                                                    np.clip(xx, 0, nx - 1)], 0)
                    count += inside
        if not periodic:
            centre_inside = (cx >= 0) & (cx < nx) & (cy >= 0) & (cy < ny)
            # a corner outside the lattice with no weight does not spoil the sample
            dead = ~centre_inside & (weight > 0)
            with np.errstate(invalid="ignore", divide="ignore"):
                mean = np.where(dead, np.nan, total / np.maximum(count, 1))
            value += np.where(weight > 0, weight * mean, 0.0)
        else:
            value += weight * total / count
    value[:, ~used] = np.nan
    return value


def _first_zero(profile: np.ndarray) -> np.ndarray:
    """Position of the first sample >= 0 of each profile (last axis), interpolated."""
    valid = np.cumprod(np.isfinite(profile), axis=-1).astype(bool)
    reached = valid & (np.nan_to_num(profile, nan=-1.0) >= 0)
    found = reached.any(axis=-1)
    first = np.argmax(reached, axis=-1)
    out = np.full(profile.shape[:-1], np.nan)
    at_start = found & (first == 0)
    out[at_start] = 0.0
    later = found & (first > 0)
    index = np.nonzero(later)
    k = first[later]
    before = profile[index + (k - 1,)]
    after = profile[index + (k,)]
    out[later] = (k - 1) + (-before) / (after - before)
    return out
