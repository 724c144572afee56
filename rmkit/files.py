"""Writing result files safely: atomically (never half a file) and checked before work starts.

``field`` arguments name where a path came from (``--out`` on the command line, ``out`` in
Python), so a message names what the user typed without this module knowing the command line.
"""

from __future__ import annotations

import os
import tempfile
from collections.abc import Callable
from pathlib import Path

from rmkit.errors import InputError

NETCDF_SUFFIXES = (".nc", ".nc4", ".netcdf")


def check_output(path: str | Path, field: str = "out", suffixes: tuple[str, ...] = ()) -> Path:
    """Refuse an output path that cannot be written, before any work: a missing or read-only
    folder, an existing folder in its place, or a suffix outside ``suffixes``."""
    target = Path(path)
    if suffixes and target.suffix.lower() not in suffixes:
        raise InputError(f"{field}: {str(path)!r} should end in {' or '.join(suffixes)}")
    folder = target.parent if str(target.parent) else Path(".")
    if target.is_dir():
        raise InputError(f"{field}: {str(path)!r} is a folder; give a file path")
    if not folder.is_dir():
        raise InputError(f"{field}: folder {str(folder)!r} does not exist; create it or pick "
                         "another path")
    if not os.access(folder, os.W_OK | os.X_OK):
        raise InputError(f"{field}: folder {str(folder)!r} is not writable; pick another path")
    return target


def write_atomically(path: str | Path, writer: Callable[[str], None], field: str = "out") -> Path:
    """Write through a temporary file in the target folder, then rename: never half a file."""
    target = check_output(path, field)
    folder = target.parent if str(target.parent) else Path(".")
    fd, tmp = tempfile.mkstemp(prefix=f".{target.name}.", dir=folder)
    os.close(fd)
    try:
        writer(tmp)
        umask = os.umask(0)
        os.umask(umask)
        os.chmod(tmp, 0o666 & ~umask)  # mkstemp makes files owner-only; give the usual mode
        os.replace(tmp, target)
    finally:
        if os.path.exists(tmp):
            os.unlink(tmp)
    return target


def write_netcdf(ds, path: str | Path, field: str = "out") -> Path:
    """Save a Dataset to NetCDF (h5netcdf engine) atomically."""
    check_output(path, field, NETCDF_SUFFIXES)
    return write_atomically(path, lambda tmp: ds.to_netcdf(tmp, engine="h5netcdf"), field)
