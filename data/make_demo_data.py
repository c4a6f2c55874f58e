"""Make the synthetic demo lab data in ``data/lab/`` (every number here is simulated).

The scenario: a thin two-phase film (a 50/50 mixture of two components, so the composition is
conserved) is quenched from a high temperature to an anneal temperature of 0.8 Tc and imaged
after several anneal times. Each image is a 96 x 96 field of view cut from a larger film, at
eight separate places of the film. The imaging is imperfect in two ways:

* detection noise: every imaged pixel reads the wrong phase with probability 3%,
  independently of all others;
* missing sites: a few dust specks and isolated dead pixels of the detector are never read
  (the same mask for every image).

How it is made:

1. The film is a 128 x 128 periodic square lattice under Kawasaki exchange dynamics
   (heat-bath acceptance), run by the coarsen engine from a random zero-magnetization start;
   the eight replicas are the eight places imaged. Time is in Monte Carlo sweeps.
2. At each anneal time the central 96 x 96 window of every replica is kept.
3. A second random stream, from its own fixed seed, draws the mask and the pixel flips.
4. The shots are written as ``synthetic_film_anneal.npz`` (``spins`` in {0, 1}, one value per
   phase, masked pixels 0; ``times``; ``mask``, true where a pixel was read),
   the layout ``coarsen measure`` reads, and their measured replica-mean ``corr_zero`` lengths
   as the CSV length table ``synthetic_film_lengths.csv`` (the layout ``coarsen fit`` reads).

Both files depend only on the seeds below: running this script again gives the same arrays
and the same CSV text, on any number of threads. No timestamps are written (the zip entries
carry a fixed date), so the .npz is byte-identical too when the same zlib compresses it.

Usage::

    python data/make_demo_data.py            # writes data/lab/ beside this script
    python data/make_demo_data.py -o DIR     # writes into DIR (created if missing)
"""

from __future__ import annotations

import argparse
import csv
import io
import os
import sys
import tempfile
import zipfile
from pathlib import Path

import numpy as np

#: The engine's seed (the film) and the imaging seed (mask and pixel flips).
FILM_SEED = 20270309
IMAGING_SEED = 20270310

#: Side of the simulated film and of the imaged window (sites), anneal temperature / Tc.
FILM_SIZE = 128
VIEW_SIZE = 96
ANNEAL_RELATIVE_TEMPERATURE = 0.8
#: Anneal times in sweeps at which the film is imaged, and the number of places imaged.
ANNEAL_TIMES = (200, 400, 800, 1600, 3200, 6400, 12800, 25600)
PLACES = 8

#: Probability that a read pixel shows the wrong phase.
FLIP_PROBABILITY = 0.03
#: Dust specks (count, smallest and largest radius in pixels) and the dead-pixel fraction.
DUST_SPECKS = 5
DUST_RADIUS = (3.0, 7.0)
DEAD_PIXEL_FRACTION = 0.005

#: The estimator of the CSV length table. The zero of C(r) does not move under independent
#: pixel flips (they scale C(r > 0) by (1 - 2p)^2), so it suits noisy images.
TABLE_ESTIMATOR = "corr_zero"

NPZ_NAME = "synthetic_film_anneal.npz"
CSV_NAME = "synthetic_film_lengths.csv"

FILM_SPEC = f"""\
# synthetic two-phase film for the coarsen demo lab data (data/make_demo_data.py)
[lattice]
kind = "square"
size = [{FILM_SIZE}, {FILM_SIZE}]
boundary = "periodic"

[dynamics]
rule = "kawasaki"
acceptance = "heat-bath"
update = "random"

[temperature]
relative = {ANNEAL_RELATIVE_TEMPERATURE}

[initial]
state = "random"
magnetization = 0.0

[measure]
times = {{ at = [{", ".join(map(str, ANNEAL_TIMES))}] }}
snapshots = {len(ANNEAL_TIMES)}

[ensemble]
replicas = {PLACES}
seed = {FILM_SEED}
"""


def simulate_film(threads: int | None = None) -> tuple[np.ndarray, np.ndarray]:
    """Run the film and cut the imaged windows.

    Returns
    -------
    windows : ndarray of shape (len(ANNEAL_TIMES), PLACES, VIEW_SIZE, VIEW_SIZE), int8
        +1/-1 configurations, axes (time, place, x, y).
    times : ndarray of shape (len(ANNEAL_TIMES),), float64
    """
    from coarsen.simulate import simulate
    from coarsen.spec import parse_spec

    ds = simulate(parse_spec(FILM_SPEC, source="data/make_demo_data.py"),
                  threads=threads).dataset
    snapshots = ds["snapshot"].transpose("snapshot_time", "replica", "x", "y").values
    start = (FILM_SIZE - VIEW_SIZE) // 2
    view = slice(start, start + VIEW_SIZE)
    windows = np.ascontiguousarray(snapshots[:, :, view, view], dtype=np.int8)
    return windows, ds["snapshot_time"].values.astype(np.float64)


def detector_mask(rng: np.random.Generator, shape: tuple[int, int]) -> np.ndarray:
    """True where the detector reads a pixel: dust specks and dead pixels are False."""
    x, y = np.indices(shape)
    mask = np.ones(shape, dtype=bool)
    for _ in range(DUST_SPECKS):
        centre = rng.uniform(0, shape[0]), rng.uniform(0, shape[1])
        radius = rng.uniform(*DUST_RADIUS)
        mask &= (x - centre[0]) ** 2 + (y - centre[1]) ** 2 > radius ** 2
    mask &= rng.random(shape) >= DEAD_PIXEL_FRACTION
    return mask


def image(windows: np.ndarray, mask: np.ndarray, rng: np.random.Generator) -> np.ndarray:
    """Detector readings in {0, 1}: flips with ``FLIP_PROBABILITY``, masked pixels 0."""
    flips = rng.random(windows.shape) < FLIP_PROBABILITY
    read = np.where(flips, -windows, windows)
    return np.where(mask, read == 1, False).astype(np.uint8)


def _write_atomically(data: bytes, path: Path) -> None:
    handle, name = tempfile.mkstemp(prefix=f".{path.name}.", suffix=".tmp", dir=path.parent)
    try:
        with os.fdopen(handle, "wb") as stream:
            stream.write(data)
            stream.flush()
            os.fsync(stream.fileno())
        os.chmod(name, 0o644)
        os.replace(name, path)
    except BaseException:
        Path(name).unlink(missing_ok=True)
        raise


def npz_bytes(arrays: dict[str, np.ndarray]) -> bytes:
    """An .npz archive (what ``np.savez_compressed`` writes) with fixed zip dates."""
    buffer = io.BytesIO()
    with zipfile.ZipFile(buffer, "w") as archive:
        for name, array in arrays.items():
            member = io.BytesIO()
            np.lib.format.write_array(member, np.ascontiguousarray(array), allow_pickle=False)
            info = zipfile.ZipInfo(f"{name}.npy", date_time=(1980, 1, 1, 0, 0, 0))
            info.compress_type = zipfile.ZIP_DEFLATED
            info.external_attr = 0o644 << 16
            archive.writestr(info, member.getvalue(), compresslevel=9)
    return buffer.getvalue()


def length_table_text(ds) -> str:
    """The CSV length table of the measured shots: comments, then time,length,length_err,replicas.

    Written here rather than with ``coarsen.write_lengths_csv`` so that no path or
    timestamp (``source_file``, ``created``) enters the file.
    """
    from coarsen.dataset import lengths_table

    table = lengths_table(ds, TABLE_ESTIMATOR)
    buffer = io.StringIO()
    buffer.write("# SYNTHETIC demo data, not a measurement: made by data/make_demo_data.py "
                 "(see data/README.md)\n")
    buffer.write("# a two-phase film (conserved, Kawasaki dynamics) annealed at 0.8 Tc, imaged "
                 f"at {PLACES} places per anneal time with {FLIP_PROBABILITY:.0%} pixel flips "
                 "and masked pixels\n")
    buffer.write(f"# lattice: {ds.attrs['lattice']} (the imaged window)\n")
    buffer.write(f"# estimator: {TABLE_ESTIMATOR}; length in pixels; length_err: standard "
                 "error of the mean over the places\n")
    buffer.write("# time: anneal time in Monte Carlo sweeps\n")
    writer = csv.writer(buffer, lineterminator="\n")
    writer.writerow(["time", "length", "length_err", "replicas"])
    for t, value, error, n in zip(table["time"], table["length"], table["length_err"],
                                  table["replicas"]):
        if n == 0:
            continue
        writer.writerow([repr(float(t)), repr(float(value)),
                         "" if not np.isfinite(error) else repr(float(error)), int(n)])
    return buffer.getvalue()


def make_demo_data(directory, *, threads: int | None = None) -> dict[str, Path]:
    """Run the film and write the two demo files into ``directory`` (created if missing).

    Returns
    -------
    dict with ``npz`` and ``csv``: the paths written.
    """
    return write_demo_files(directory, *simulate_film(threads))


def write_demo_files(directory, windows: np.ndarray, times: np.ndarray) -> dict[str, Path]:
    """Image the film's windows (mask, pixel flips) and write the .npz and the CSV table.

    Parameters
    ----------
    directory : path-like
        Created if missing.
    windows, times
        From :func:`simulate_film`.

    Returns
    -------
    dict with ``npz`` and ``csv``: the paths written.
    """
    from coarsen.dataset import write_text_atomically
    from coarsen.labdata import load_snapshots, measure_snapshots

    directory = Path(directory)
    directory.mkdir(parents=True, exist_ok=True)
    rng = np.random.Generator(np.random.PCG64(np.random.SeedSequence(IMAGING_SEED)))
    mask = detector_mask(rng, (VIEW_SIZE, VIEW_SIZE))
    readings = image(windows, mask, rng)
    shots = readings.reshape(-1, VIEW_SIZE, VIEW_SIZE)
    shot_times = np.repeat(times, PLACES)
    npz_path = directory / NPZ_NAME
    _write_atomically(npz_bytes({"spins": shots, "times": shot_times, "mask": mask}), npz_path)
    ds = measure_snapshots(load_snapshots(npz_path))
    csv_path = write_text_atomically(length_table_text(ds), directory / CSV_NAME)
    return {"npz": npz_path, "csv": csv_path}


def main(argv=None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("-o", "--output", default=str(Path(__file__).resolve().parent / "lab"),
                        metavar="DIR", help="output directory (default: data/lab/)")
    parser.add_argument("--threads", type=int, default=None,
                        help="engine threads (the files do not depend on it)")
    args = parser.parse_args(argv)
    paths = make_demo_data(args.output, threads=args.threads)
    for path in paths.values():
        print(f"wrote {path} ({path.stat().st_size / 1024:.0f} KB)")
    return 0


if __name__ == "__main__":
    sys.exit(main())
