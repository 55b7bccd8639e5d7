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


#: Name of the marker file written into every output folder; ``--overwrite`` replaces only folders holding it.
OUTPUT_MARKER = ".courseplan-output"


def _resolved(p: Path) -> Path:
    try:
        return Path(os.path.realpath(os.path.abspath(p)))
    except OSError:
        return Path(os.path.abspath(p))


def refuse_out_over_inputs(out: Path, inputs: dict[str, Path]) -> None:
    """Refuse an output folder that is, or holds, an input file (or lies inside an input folder such as a ``.gdb``).

    Replacing such a folder (``--overwrite``) or moving a new folder onto it would destroy the input.

    Parameters
    ----------
    out
        The output folder asked for.
    inputs
        What each input is ("course", "sun", ...) → its path.
    """
    o = _resolved(Path(out))
    for what, path in inputs.items():
        if path is None:
            continue
        i = _resolved(Path(path))
        inside = i == o or o in i.parents
        within_input_folder = i.is_dir() and (o == i or i in o.parents)
        if inside or within_input_folder:
            raise OutputError(f"the output folder {'is' if i == o else 'holds'} the {what} input {path}"
                              if inside else f"the output folder lies inside the {what} input {path}",
                              where=str(out), fix="choose an --out folder away from the input files "
                                                  "(a new folder beside them is fine)")


def refuse_foreign_folder(out: Path) -> None:
    """Refuse to replace an existing folder that courseplan did not write (it holds no marker file)."""
    p = Path(out)
    if p.is_dir() and not (p / OUTPUT_MARKER).is_file():
        raise OutputError("the output folder was not written by courseplan (it has no "
                          f"{OUTPUT_MARKER} file), so --overwrite will not replace it", where=str(p),
                          fix="choose a new --out folder, or empty/remove this one yourself")


class OutputLock:
    """An exclusive lock beside an output path, so that two runs into one target cannot both win.

    The lock is a file ``.NAME.courseplan-lock`` created with ``O_CREAT | O_EXCL`` in the target's
    parent folder; it holds the owner's process id and is removed on exit.  A lock left by a process
    that no longer runs (killed with SIGKILL, a power cut) is taken over.
    """

    def __init__(self, target: Path):
        t = Path(target)
        parent = t.parent if str(t.parent) else Path(".")
        self.target = t
        self.path = parent / f".{t.name}.courseplan-lock"
        self._held = False

    def _take(self) -> bool:
        try:
            fd = os.open(self.path, os.O_CREAT | os.O_EXCL | os.O_WRONLY, 0o644)
        except FileExistsError:
            return False
        try:
            os.write(fd, str(os.getpid()).encode())
        finally:
            os.close(fd)
        self._held = True
        return True

    def _owner_alive(self) -> bool:
        try:
            pid = int(self.path.read_text().strip() or "0")
        except (OSError, ValueError):
            return True  # being written right now, or unreadable: assume a live owner
        if pid <= 0:
            return True
        if pid == os.getpid():
            return True
        try:
            os.kill(pid, 0)
        except ProcessLookupError:
            return False
        except OSError:
            return True
        return True

    def __enter__(self) -> OutputLock:
        try:
            self.path.parent.mkdir(parents=True, exist_ok=True)
            if self._take():
                return self
            if not self._owner_alive():
                try:
                    os.unlink(self.path)
                except FileNotFoundError:
                    pass
                if self._take():
                    return self
        except OSError as exc:
            raise OutputError(f"cannot take the output lock ({exc.strerror or exc})", where=str(self.path),
                              fix="check the folder is writable") from None
        raise OutputError("another courseplan run is writing to this output right now", where=str(self.target),
                          fix=f"wait for it to finish, or choose another --out (remove {self.path} only if "
                              "no run is going)")

    def __exit__(self, *exc) -> None:
        if self._held:
            try:
                os.unlink(self.path)
            except OSError:
                pass
            self._held = False


def read_text(path: Path, what: str) -> str:
    """The text of a UTF-8 file (a byte-order mark is dropped), or one line naming the encoding problem.

    Raises
    ------
    InputError
        The file is not UTF-8: the message names the first bad byte, its line, what it would be in
        Windows-1252 (the usual culprit: Excel's "CSV" on Windows), and says to save as UTF-8.
    """
    from courseplan.errors import InputError

    p = Path(path)
    try:
        data = p.read_bytes()
    except OSError as exc:
        raise MissingInputError(f"{what} file cannot be read ({exc.strerror})", where=str(p),
                                fix="check the file's permissions") from None
    if data.startswith((b"\xff\xfe", b"\xfe\xff")):
        raise InputError(f"the {what} file is UTF-16 text, not UTF-8", where=str(p),
                         fix="save it as UTF-8 (in Excel: Save As → CSV UTF-8)")
    try:
        return data.decode("utf-8-sig")
    except UnicodeDecodeError as exc:
        bad = data[exc.start:exc.start + 1]
        line = data[:exc.start].count(b"\n") + 1
        try:
            guess = data.decode("cp1252")
            ch = bad.decode("cp1252")
            hint = f"; it looks like Windows-1252 (the byte would be {ch!r})" if guess else ""
        except UnicodeDecodeError:
            hint = ""
        raise InputError(f"the {what} file is not UTF-8 text (byte 0x{bad.hex()} on line {line}{hint})",
                         where=str(p), fix="save it as UTF-8 (in Excel: Save As → CSV UTF-8)") from None


def sniff_delimiter(text: str, default: str = ",") -> str:
    """The field separator of a CSV text: comma, semicolon or tab, judged by the header line.

    A semicolon-separated file is what spreadsheets write where the comma is the decimal mark;
    its numbers then use decimal commas (see :func:`decimal_number`).
    """
    import csv

    head = next((ln for ln in text.splitlines() if ln.strip()), "")
    try:
        return csv.Sniffer().sniff(head, delimiters=",;\t").delimiter
    except csv.Error:
        counts = {d: head.count(d) for d in (",", ";", "\t")}
        best = max(counts, key=lambda d: counts[d])
        return best if counts[best] else default


def decimal_number(text: str) -> float:
    """``float`` that also reads a decimal comma (``1,5`` → 1.5, ``-0,25`` → -0.25)."""
    s = text.strip()
    if s.count(",") == 1 and "." not in s:
        s = s.replace(",", ".")
    return float(s)
