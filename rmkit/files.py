"""Writing result files safely: atomically (never half a file) and checked before work starts.

``field`` arguments name where a path came from (``--out`` on the command line, ``out`` in
Python), so a message names what the user typed without this module knowing the command line.
"""

from __future__ import annotations

import os
import stat
import tempfile
from collections.abc import Callable
from pathlib import Path

from rmkit.errors import InputError

NETCDF_SUFFIXES = (".nc", ".nc4", ".netcdf")


def check_input(path: str | Path, what: str = "file") -> Path:
    """Refuse, before opening it, an input that is missing, a folder, not a regular file (a FIFO
    would block the reader, a device never ends) or unreadable."""
    p = Path(path)
    try:
        mode = p.stat().st_mode
    except FileNotFoundError:
        raise InputError(f"{p}: no such file; give the path of a {what}") from None
    except OSError as err:
        raise InputError(f"{p}: cannot read it ({err.strerror}); give the path of a {what}") from None
    if stat.S_ISDIR(mode):
        raise InputError(f"{p}: is a folder; give the path of a {what}")
    if not stat.S_ISREG(mode):
        raise InputError(f"{p}: is not a regular file (a pipe, socket or device); give the path "
                         f"of a {what}")
    if not os.access(p, os.R_OK):
        raise InputError(f"{p}: permission denied; make it readable or give another {what}")
    return p


def read_text(path: Path, what: str = "file") -> str:
    """The UTF-8 text of an input file passed by :func:`check_input`; a byte-order mark at the
    start is dropped. Messages do not repeat the path: the caller names the file."""
    try:
        return path.read_text(encoding="utf-8-sig")
    except UnicodeDecodeError:
        raise InputError(f"not a UTF-8 text file; give a {what}") from None
    except OSError as err:
        raise InputError(f"cannot read it ({err.strerror}); give a {what}") from None


def check_output(path: str | Path, field: str = "out", suffixes: tuple[str, ...] = ()) -> Path:
    """Refuse an output path that cannot be written, before any work: a missing folder, a folder
    where no file can be made (read-only, /proc, /sys), an existing folder or other non-regular
    file in its place, or a suffix outside ``suffixes``."""
    target = Path(path)
    if target.is_dir():
        raise InputError(f"{field}: {str(path)!r} is a folder; give a file path")
    if suffixes and target.suffix.lower() not in suffixes:
        raise InputError(f"{field}: {str(path)!r} should end in {' or '.join(suffixes)}")
    folder = target.parent if str(target.parent) else Path(".")
    if target.exists() and not target.is_file():
        raise InputError(f"{field}: {str(path)!r} exists and is not a regular file; pick "
                         "another path")
    if not folder.is_dir():
        raise InputError(f"{field}: folder {str(folder)!r} does not exist; create it or pick "
                         "another path")
    # Permission bits do not tell (root ignores them; /proc and /sys refuse new files anyway):
    # make and remove a temporary file, as the atomic write will.
    try:
        fd, probe = tempfile.mkstemp(prefix=f".{target.name}.", dir=folder)
    except OSError as err:
        raise InputError(f"{field}: cannot write in folder {str(folder)!r} ({err.strerror}); "
                         "pick another path") from None
    os.close(fd)
    os.unlink(probe)
    return target


def check_output_folder(path: str | Path, field: str = "out_dir") -> Path:
    """Refuse, before any work, an output folder that cannot be made or written in: the
    nearest existing folder on its path must take new files."""
    target = Path(path)
    probe = target
    while not probe.exists() and probe != probe.parent:
        probe = probe.parent
    if not probe.is_dir():
        raise InputError(f"{field}: {str(probe)!r} exists and is not a folder; pick another path")
    check_output(probe / "probe", field)
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
