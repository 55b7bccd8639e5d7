"""Files: the one place that checks an input is readable, refuses to replace an output, and writes atomically.

- :func:`check_readable` — an existing, readable input file (one clear error otherwise);
- :func:`refuse_existing` — the "output exists" refusal shared by every command;
- :func:`write_atomic` — write through a temporary file beside the target, then ``os.replace``;
  nothing half-written is ever left under the target's name, whatever interrupts the write;
- :func:`write_text_atomic`, :func:`write_bytes_atomic` — the two common cases;
- :func:`file_mode`, :func:`folder_mode` — the modes a plain ``open``/``mkdir`` would give under the
  process umask (0644 and 0755 under the usual 022), which the temporary files and folders
  (0600 and 0700 from :mod:`tempfile`) get before they are moved into place.
"""

from __future__ import annotations

import os
import tempfile
from collections.abc import Callable
from pathlib import Path

from courseplan.errors import MissingInputError, OutputError


def check_readable(path: Path, what: str) -> Path:
    """Raise :class:`MissingInputError` unless *path* is an existing, readable file."""
    p = Path(path)
    if not p.exists():
        raise MissingInputError(f"{what} file not found", where=str(p),
                                fix="check the path (relative paths in a plan file start at the plan file's folder)")
    if p.is_dir() and p.suffix.lower() not in (".gdb",):
        raise MissingInputError(f"{what} path is a folder, not a file", where=str(p), fix="name the file itself")
    try:
        if p.is_file():
            with open(p, "rb") as fh:
                fh.read(1)
    except OSError as exc:
        raise MissingInputError(f"{what} file cannot be read ({exc.strerror})", where=str(p),
                                fix="check the file's permissions") from None
    return p


def refuse_existing(path: Path, overwrite: bool, *, kind: str = "file") -> None:
    """Raise :class:`OutputError` when *path* exists and *overwrite* is not set (or is of the wrong kind)."""
    p = Path(path)
    if not p.exists():
        return
    if not overwrite:
        raise OutputError(f"the output {kind} already exists", where=str(p),
                          fix=f"choose a new {'--out folder' if kind == 'folder' else 'name'} or add --overwrite")
    if kind == "folder" and not p.is_dir():
        raise OutputError("the output path is a file", where=str(p), fix="choose a folder name")
    if kind == "file" and p.is_dir():
        raise OutputError("the output path is a folder", where=str(p), fix="choose a file name")


def process_umask() -> int:
    """The process umask, read without changing it where the system allows (Linux ``/proc``)."""
    try:
        with open("/proc/self/status", encoding="ascii") as fh:
            for line in fh:
                if line.startswith("Umask:"):
                    return int(line.split()[1], 8)
    except (OSError, ValueError, IndexError):
        pass
    old = os.umask(0o022)  # elsewhere: the classic set-and-restore
    os.umask(old)
    return old


def file_mode() -> int:
    """Mode of a new output file: 0666 less the umask (0644 under umask 022)."""
    return 0o666 & ~process_umask()


def folder_mode() -> int:
    """Mode of a new output folder: 0777 less the umask (0755 under umask 022)."""
    return 0o777 & ~process_umask()


def write_atomic(path: Path, write: Callable[[Path], object], *, what: str = "file") -> Path:
    """Call ``write(tmp)`` on a temporary path beside *path*, then move it into place.

    Raises
    ------
    OutputError
        The folder is missing or the file cannot be written (a full disk, no permission).
    """
    target = Path(path)
    folder = target.parent if str(target.parent) else Path(".")
    if not folder.is_dir():
        raise OutputError(f"the {what}'s folder does not exist", where=str(folder),
                          fix="create the folder or choose another output path")
    tmp = None
    try:
        fd, tmp = tempfile.mkstemp(prefix=f".{target.name}.", suffix=".part", dir=folder)
        os.close(fd)
        write(Path(tmp))
        os.chmod(tmp, file_mode())  # mkstemp made it 0600
        os.replace(tmp, target)
        tmp = None
    except OSError as exc:
        raise OutputError(f"cannot write the {what} ({exc.strerror or exc})", where=str(target),
                          fix="check the folder is writable and the disk has room") from None
    finally:
        if tmp is not None and os.path.exists(tmp):
            os.unlink(tmp)
    return target


def write_text_atomic(path: Path, text: str, *, what: str = "file") -> Path:
    """Write UTF-8 text atomically (see :func:`write_atomic`)."""
    return write_atomic(path, lambda p: p.write_text(text, encoding="utf-8", newline="\n"), what=what)


def write_bytes_atomic(path: Path, data: bytes, *, what: str = "file") -> Path:
    """Write bytes atomically (see :func:`write_atomic`)."""
    return write_atomic(path, lambda p: p.write_bytes(data), what=what)
