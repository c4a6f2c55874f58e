"""Where the compiled kernels are cached: one directory per version of the kernel sources.

Numba's on-disk cache is keyed by the file that holds a jitted function, so editing a helper
in another kernel module can leave its callers' cached machine code stale, and its default
location beside the sources fails on read-only installs. Every kernel therefore caches into
``<XDG_CACHE_HOME or ~/.cache>/coarsen/numba-<digest>``, where the digest covers the text of
every ``coarsen/kernels/*.py``: any edit of any kernel source selects a fresh directory.
An unwritable user cache falls back to a directory under :func:`tempfile.gettempdir`.

This module imports only the standard library, so that the command line can export the
directory to ``NUMBA_CACHE_DIR`` before anything imports Numba.
"""

from __future__ import annotations

import functools
import hashlib
import os
import tempfile
from pathlib import Path

__all__ = ["KERNELS_DIRECTORY", "kernel_source_digest", "numba_cache_dir"]

#: The directory holding the kernel sources.
KERNELS_DIRECTORY = Path(__file__).resolve().parent / "kernels"

_DIGEST_LENGTH = 16


def kernel_source_digest(directory: str | os.PathLike | None = None) -> str:
    """First 16 hex digits of a SHA-256 over the kernel sources.

    Parameters
    ----------
    directory : path-like, optional
        Directory of the kernel modules; default: the installed ``coarsen/kernels``.

    Returns
    -------
    str
        16 lowercase hex digits. The hash runs over the ``*.py`` files sorted by name, each
        contributing its file name and its bytes, so renaming, adding, removing or editing a
        kernel module changes it; touching a file does not.
    """
    directory = KERNELS_DIRECTORY if directory is None else Path(directory)
    digest = hashlib.sha256()
    for path in sorted(directory.glob("*.py"), key=lambda p: p.name):
        digest.update(path.name.encode())
        digest.update(b"\0")
        digest.update(path.read_bytes())
        digest.update(b"\0")
    return digest.hexdigest()[:_DIGEST_LENGTH]


def _user_cache_root() -> Path | None:
    xdg = os.environ.get("XDG_CACHE_HOME", "")
    if xdg and os.path.isabs(xdg):
        return Path(xdg)
    try:
        return Path.home() / ".cache"
    except (RuntimeError, KeyError):  # no HOME and no password entry
        return None


def _writable_directory(path: Path) -> bool:
    """Create ``path`` if needed and check that a file can be written in it."""
    try:
        path.mkdir(parents=True, exist_ok=True)
        fd, probe = tempfile.mkstemp(prefix=".probe-", dir=path)
        os.close(fd)
        os.unlink(probe)
    except OSError:
        return False
    return True


@functools.cache
def numba_cache_dir() -> str | None:
    """The directory for Numba's cache of the kernels, created if needed.

    Returns
    -------
    str or None
        ``<XDG_CACHE_HOME or ~/.cache>/coarsen/numba-<digest>`` (see
        :func:`kernel_source_digest`) when it is writable, else
        ``<tempdir>/coarsen-<uid>/numba-<digest>``; None when neither can be written, in which
        case Numba's own search for a cache location applies. The answer is computed once per
        process.
    """
    name = f"numba-{kernel_source_digest()}"
    candidates = []
    root = _user_cache_root()
    if root is not None:
        candidates.append(root / "coarsen" / name)
    user = os.getuid() if hasattr(os, "getuid") else "user"
    candidates.append(Path(tempfile.gettempdir()) / f"coarsen-{user}" / name)
    for candidate in candidates:
        if _writable_directory(candidate):
            return str(candidate)
    return None
