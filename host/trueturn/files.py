"""Files the person names: the one rule for writing them and for reading them.

**Writing** (every command's ``-o``, ``--csv``, job files, machine profiles, captures):

* the target is a regular file or does not exist yet. A folder, a device node, a FIFO or a
  socket is refused with one line (write to standard output with ``-`` where a command
  offers it), so an atomic save never turns ``/dev/...`` or a pipe into a regular file;
* a **symbolic link is refused**, dangling or not: an atomic save replaces the name it is
  given, so writing "through" a link would either break the link or write somewhere the
  command line does not say. Name the file the link points to instead;
* the folder must exist: no command creates folders the person named (the workspace
  creates its own ``machines/`` and ``jobs/`` folders, and nothing else);
* saves are atomic: a temporary file in the same folder, flushed and fsynced, renamed over
  the target, then the folder fsynced, so a crash leaves the old file or the new one.

**Reading** (capture files, YAML documents): the input must be a regular file (``/dev/zero``,
``/dev/urandom``, a FIFO or a folder are refused at once, before a byte is read) and text
documents are refused above :data:`MAX_TEXT_BYTES` before they are read to the end.
"""

from __future__ import annotations

import contextlib
import os
import stat
import tempfile
from pathlib import Path

from trueturn.errors import UserError, one_line

__all__ = ["MAX_TEXT_BYTES", "atomic_write_bytes", "atomic_write_text", "check_input",
           "check_output", "fsync_directory", "read_text_file", "TEMP_PREFIX", "TEMP_SUFFIX"]

#: The largest YAML document read (job records, profiles, readings files, scenarios). A job
#: of 1000 runs is about 2 MB; 16 MB leaves room and refuses a runaway file at once.
MAX_TEXT_BYTES = 16 * 1024 * 1024

TEMP_PREFIX = ".tt-"
TEMP_SUFFIX = ".tmp"


def _name(path: str | os.PathLike[str]) -> str:
    return one_line(os.fspath(path))


def _kind(mode: int) -> str:
    if stat.S_ISDIR(mode):
        return "a folder"
    if stat.S_ISCHR(mode) or stat.S_ISBLK(mode):
        return "a device"
    if stat.S_ISFIFO(mode):
        return "a pipe (FIFO)"
    if stat.S_ISSOCK(mode):
        return "a socket"
    return "not a regular file"


def _no_nul(path: str | os.PathLike[str]) -> None:
    if "\0" in os.fspath(path):
        raise UserError(f"{_name(path)}: a file name cannot contain a NUL byte")


def check_output(path: str | os.PathLike[str], *, stdout_dash: bool = False) -> Path:
    """``path`` if it may be written by an atomic save (see the module's rule), else a
    one-line :class:`UserError`. ``stdout_dash``: the command writes ``-`` to standard output
    (said in the refusal of a device or pipe)."""
    _no_nul(path)
    target = Path(path)
    name = _name(path)
    if os.fspath(path) == "":
        raise UserError("an empty file name; give a file to write")
    try:
        mode: int | None = os.lstat(target).st_mode
    except FileNotFoundError:
        mode = None
    except OSError as exc:
        raise UserError(f"cannot write {name}: {exc.strerror or exc}") from None
    if mode is not None:
        if stat.S_ISLNK(mode):
            raise UserError(f"{name} is a symbolic link; trueturn does not write through "
                            "links: name the file itself")
        if stat.S_ISDIR(mode):
            raise UserError(f"{name} is a folder; give a file name")
        if not stat.S_ISREG(mode):
            dash = " (or '-' for standard output)" if stdout_dash else ""
            raise UserError(f"{name} is {_kind(mode)}; give a regular file to write{dash}")
    folder = target.parent
    if not folder.is_dir():
        what = "is not a folder" if folder.exists() else "does not exist"
        raise UserError(f"cannot write {name}: folder {_name(folder)} {what}")
    return target


def fsync_directory(folder: Path) -> None:
    """Make a rename in ``folder`` durable (POSIX; a no-op where folders cannot be opened)."""
    if os.name != "posix":
        return
    fd = os.open(folder, os.O_RDONLY)
    try:
        os.fsync(fd)
    finally:
        os.close(fd)


def _umask() -> int:
    mask = os.umask(0)
    os.umask(mask)
    return mask


def atomic_write_bytes(path: str | os.PathLike[str], data: bytes) -> Path:
    """Write ``data`` to ``path`` atomically after :func:`check_output`: temp file in the
    same folder, fsync, rename, fsync the folder. A failure (a full disk, no permission) is
    one line naming the file, and the old file is left as it was."""
    target = check_output(path)
    folder = target.parent
    name = _name(target)
    try:
        fd, temp_name = tempfile.mkstemp(prefix=f"{TEMP_PREFIX}{target.name}.",
                                         suffix=TEMP_SUFFIX, dir=folder)
    except OSError as exc:
        raise UserError(f"cannot write {name}: {exc.strerror or exc}") from None
    try:
        with os.fdopen(fd, "wb") as handle:
            handle.write(data)
            handle.flush()
            os.fsync(handle.fileno())
        if target.exists():
            with contextlib.suppress(OSError):
                os.chmod(temp_name, target.stat().st_mode & 0o7777)
        else:
            with contextlib.suppress(OSError):
                os.chmod(temp_name, 0o666 & ~_umask())
        os.replace(temp_name, target)
        fsync_directory(folder)
    except OSError as exc:
        with contextlib.suppress(OSError):
            os.unlink(temp_name)
        raise UserError(f"cannot write {name}: {exc.strerror or exc}; the old file, if "
                        "any, is unchanged") from None
    except BaseException:
        with contextlib.suppress(OSError):
            os.unlink(temp_name)
        raise
    return target


def atomic_write_text(path: str | os.PathLike[str], text: str) -> Path:
    """:func:`atomic_write_bytes` for UTF-8 text."""
    return atomic_write_bytes(path, text.encode("utf-8"))


def check_input(path: str | os.PathLike[str]) -> Path:
    """``path`` if it is an existing regular file (symbolic links followed), else one line:
    a device such as ``/dev/zero``, a FIFO or a folder is refused before anything is read."""
    _no_nul(path)
    name = _name(path)
    if os.fspath(path) == "":
        raise UserError("an empty file name; give a file to read")
    try:
        mode = os.stat(path).st_mode
    except FileNotFoundError:
        raise UserError(f"{name}: no such file") from None
    except OSError as exc:
        raise UserError(f"cannot read {name}: {exc.strerror or exc}") from None
    if not stat.S_ISREG(mode):
        raise UserError(f"{name} is {_kind(mode)}; give a regular file to read")
    return Path(path)


def read_text_file(path: str | os.PathLike[str], max_bytes: int = MAX_TEXT_BYTES) -> str:
    """The UTF-8 text of a regular file of at most ``max_bytes`` (read no further)."""
    source = check_input(path)
    name = _name(path)
    try:
        with open(source, "rb") as handle:
            data = handle.read(max_bytes + 1)
    except OSError as exc:
        raise UserError(f"cannot read {name}: {exc.strerror or exc}") from None
    if len(data) > max_bytes:
        raise UserError(f"{name}: larger than {max_bytes // (1024 * 1024)} MB; not a file "
                        "trueturn wrote or expects")
    try:
        return data.decode("utf-8")
    except UnicodeDecodeError:
        raise UserError(f"{name}:1: not a text file (not UTF-8)") from None
