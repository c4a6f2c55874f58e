"""Seeded configurations: a domain of the down phase placed in an up background.

Each shape is a pure function of the lattice and its parameters returning a boolean array of
``lattice.shape`` that is True on the seed's sites; :mod:`coarsen.initial` turns it into spins
(-1 on the seed, +1 elsewhere). Parameters are in lattice spacings and coordinates in
``(x, y, z)`` order, as in the spec file.

Shapes
------
``disk``
    Sites within ``radius`` of the centre (a disk in 2-D, a ball in 3-D, an interval in 1-D).
    Distances use the real geometry (the triangular lattice's sheared grid is unsheared) and,
    on periodic axes, the nearest image of the centre.
``square``
    Sites whose coordinates all lie within ``side / 2`` of the centre (a square or cube).
``stripe``
    Sites whose x lies within ``width / 2`` of the centre's x: a band across the lattice with
    two flat interfaces normal to x.
``zigzag``
    Sites below the sawtooth line ``y = c_y + amplitude * tri((x - c_x) / period)``, where
    ``tri`` is the triangle wave of period 1 with values in [-1, 1] and an apex (+1) at 0: one
    zigzag interface (2-D and 3-D; uniform along z). On a periodic lattice the edge y = 0 is a
    second, flat interface, and ``period`` must divide the x size so the line closes.
``file``
    A configuration read from an array file (see :func:`read_configuration`).

``centre`` defaults to the middle of the lattice, ``(size - 1) / 2`` on every axis.
"""

from __future__ import annotations

import math
import zipfile
from pathlib import Path

import numpy as np

from coarsen._validation import ParameterError, check_number
from coarsen.lattice import Lattice

__all__ = ["SEEDED_PARAMETERS", "read_configuration", "seed_sites", "seed_centre"]

#: Parameters of each seeded state: name -> (required, optional).
SEEDED_PARAMETERS: dict[str, tuple[tuple[str, ...], tuple[str, ...]]] = {
    "disk": (("radius",), ("centre",)),
    "square": (("side",), ("centre",)),
    "stripe": (("width",), ("centre",)),
    "zigzag": (("amplitude", "period"), ("centre",)),
    "file": (("path",), ()),
}


def seed_centre(lattice: Lattice, centre=None, name: str = "initial.centre") -> np.ndarray:
    """The seed's centre in (x, y, z) order: ``centre`` validated, or the lattice's middle."""
    d = lattice.dimension
    if centre is None:
        return (np.asarray(lattice.size, dtype=np.float64) - 1.0) / 2.0
    if not isinstance(centre, (list, tuple)) or len(centre) != d:
        raise ParameterError(f"{name}: {centre!r} is not a list of {d} coordinates",
                             name=name, value=centre)
    values = [check_number(c, name) for c in centre]
    for c, n in zip(values, lattice.size):
        if not 0.0 <= c <= n - 1:
            raise ParameterError(f"{name}: {centre!r} lies outside the lattice "
                                 f"(0 to size - 1 on each axis, size {list(lattice.size)})",
                                 name=name, value=centre)
    return np.asarray(values, dtype=np.float64)


def _offsets(lattice: Lattice, centre: np.ndarray) -> list[np.ndarray]:
    """Per axis (x, y, z), the coordinate minus the centre, broadcastable to lattice.shape;
    nearest image on periodic axes."""
    d = lattice.dimension
    out = []
    for axis, (n, c) in enumerate(zip(lattice.size, centre)):
        shape = [1] * d
        shape[d - 1 - axis] = n
        delta = np.arange(n, dtype=np.float64) - c
        if lattice.periodic:
            delta = delta - n * np.round(delta / n)
        out.append(delta.reshape(shape))
    return out


def _positive(parameters: dict, key: str) -> float:
    return check_number(parameters[key], f"initial.{key}", minimum=0.0, strict_minimum=True)


def seed_sites(state: str, lattice: Lattice, parameters: dict) -> np.ndarray:
    """Boolean array of ``lattice.shape``, True on the sites of the seeded domain.

    Parameters
    ----------
    state : {"disk", "square", "stripe", "zigzag"}
    lattice : Lattice
    parameters : dict
        The state's parameters (:data:`SEEDED_PARAMETERS`).

    Raises
    ------
    ValueError
        For bad parameters (the message names ``initial.<key>``) or a seed with no site.
    """
    centre = seed_centre(lattice, parameters.get("centre"))
    delta = _offsets(lattice, centre)
    if state == "disk":
        radius = _positive(parameters, "radius")
        if lattice.kind == "triangular":  # unshear: r = x a1 + y a2, a2 = (-1/2, sqrt(3)/2)
            dx, dy = delta[0] - delta[1] / 2.0, delta[1] * (math.sqrt(3.0) / 2.0)
            squared = dx ** 2 + dy ** 2
        else:
            squared = sum(part ** 2 for part in delta)
        sites = squared <= radius ** 2 * (1 + 1e-12)
    elif state == "square":
        half = _positive(parameters, "side") / 2.0
        sites = np.ones(lattice.shape, dtype=bool)
        for part in delta:
            sites = sites & (np.abs(part) < half)
    elif state == "stripe":
        half = _positive(parameters, "width") / 2.0
        sites = np.broadcast_to(np.abs(delta[0]) < half, lattice.shape)
    elif state == "zigzag":
        if lattice.dimension < 2:
            raise ParameterError("initial.state: 'zigzag' needs a lattice of 2 or 3 "
                                 "dimensions", name="initial.state", value=state)
        amplitude = check_number(parameters["amplitude"], "initial.amplitude", minimum=0.0)
        period = _positive(parameters, "period")
        nx, ny = lattice.size[0], lattice.size[1]
        if lattice.periodic and not float(nx / period).is_integer():
            raise ParameterError(
                f"initial.period: {parameters['period']!r} does not divide the x size {nx}, "
                "so the zigzag would not close across the periodic edge",
                name="initial.period", value=parameters["period"])
        if amplitude >= ny / 2:
            raise ParameterError(
                f"initial.amplitude: {parameters['amplitude']!r} must be below half the y "
                f"size ({ny / 2:g}) for the interface to fit", name="initial.amplitude",
                value=parameters["amplitude"])
        d = lattice.dimension
        x_shape, y_shape = [1] * d, [1] * d
        x_shape[d - 1], y_shape[d - 2] = nx, ny
        u = (np.arange(nx) - centre[0]) / period
        triangle = 1.0 - 4.0 * np.abs(u - np.floor(u + 0.5))
        line = (centre[1] + amplitude * triangle).reshape(x_shape)
        sites = np.broadcast_to(np.arange(ny).reshape(y_shape) < line, lattice.shape)
    else:
        raise ParameterError(f"initial.state: {state!r} is not a seeded shape",
                             name="initial.state", value=state)
    sites = np.ascontiguousarray(sites)
    if not sites.any():
        raise ParameterError(f"initial.state: the {state} seed holds no site; make it larger",
                             name="initial.state", value=state)
    return sites


def read_configuration(path, lattice: Lattice, replicas: int, name: str = "initial.path",
                       ) -> np.ndarray:
    """Read starting spins from ``.npy`` or ``.npz`` (array ``spins``).

    The array is one configuration with shape ``lattice.size`` (axes in (x, y, z) order, like
    a dataset's ``snapshot``), used for every replica, or one per replica with shape
    ``(replicas, *lattice.size)``. Values are {0, 1} (0 = down) or {-1, +1}. Never unpickles.

    Returns
    -------
    ndarray of shape (replicas, *lattice.shape), int8

    Raises
    ------
    ValueError
        Naming ``name`` and the file, for a missing or unreadable file, a wrong shape or
        values other than those allowed.
    """
    path = Path(path)

    def fail(message):
        raise ParameterError(f"{name}: {str(path)!r}: {message}", name=name, value=str(path))

    if not path.is_file():
        fail("no such file")
    try:
        if path.suffix.lower() == ".npz":
            with np.load(path, allow_pickle=False) as archive:
                if "spins" not in archive.files:
                    fail(f"holds {sorted(archive.files)!r} but no array named 'spins'")
                values = archive["spins"]
        elif path.suffix.lower() == ".npy":
            values = np.load(path, allow_pickle=False)
        else:
            fail("unsupported file type; give .npy or .npz")
    except ValueError as error:
        if isinstance(error, ParameterError):
            raise
        fail(f"not a plain numeric array file ({error})")
    except (OSError, EOFError, zipfile.BadZipFile) as error:  # empty, truncated, torn archive
        fail(f"not readable ({type(error).__name__}: {error})")
    size = tuple(lattice.size)
    if values.shape == size:
        values = np.broadcast_to(values, (replicas, *size))
    elif values.shape != (replicas, *size):
        fail(f"holds shape {values.shape}; expected {size} or {(replicas, *size)} "
             "(sites per axis in x, y, z order)")
    if not np.issubdtype(values.dtype, np.number) and values.dtype != bool:
        fail(f"has dtype {values.dtype}; expected 0/1 or -1/+1 numbers")
    distinct = np.unique(values)
    if np.isin(distinct, (0, 1)).all():
        spins = np.where(values == 1, 1, -1)
    elif np.isin(distinct, (-1, 1)).all():
        spins = np.where(values == -1, -1, 1)
    else:
        fail(f"holds values {distinct[:6].tolist()!r}; expected {{0, 1}} or {{-1, +1}}")
    d = lattice.dimension
    order = [0] + list(range(d, 0, -1))
    return np.ascontiguousarray(spins.transpose(order), dtype=np.int8)
