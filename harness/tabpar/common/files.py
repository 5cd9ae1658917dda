"""Files tabpar reads and writes, in one place so every path gets the same checks.

- Writes never leave a half-written file or folder behind, and a file-system fault (a full
  disk, a read-only or missing folder) is one sentence naming the path (``write_error``).
- A user's file is read only when it is a regular file (``open_regular``; a FIFO, device,
  socket or folder would block or mislead), and text is read up to a bound.
- A state file tabpar wrote and reads back (results, run metadata, cache entries, stores,
  reports) is parsed and checked before it is trusted (``read_state_json``, ``check_fields``);
  a torn or foreign one is one sentence naming the file and what to do.
"""
from __future__ import annotations

import errno
import json
import os
import shutil
import stat
import tempfile
from contextlib import contextmanager
from pathlib import Path

from tabpar.common.errors import UserError

# A CSV header past either bound is almost surely not a table (or not one tabpar can prepare
# in reasonable memory): 1 MiB holds 10,000 names of 100 characters.
MAX_HEADER_BYTES = 1 << 20
MAX_COLUMNS = 10_000
# Suite, variant and state files are small; a larger one is a wrong file.
MAX_TEXT_BYTES = 16 << 20


class StateWarning(UserWarning):
    """Something tabpar wrote was found incomplete and skipped (the CLI prints it as one
    line)."""


# --- writes ------------------------------------------------------------------------------
def _umask() -> int:
    mask = os.umask(0)
    os.umask(mask)
    return mask


def write_error(path: str | Path, exc: OSError, fix: str | None = None) -> UserError:
    """The one-sentence UserError for an OSError while writing ``path``.

    ``fix`` says what to do (e.g. "choose another --out"); by default it follows the error:
    free space for a full disk, a writable folder otherwise.

    >>> print(write_error("out/x.json", OSError(errno.ENOSPC, "No space left on device")))
    Cannot write out/x.json (No space left on device); free disk space there or choose another folder.
    """
    if fix is None:
        full = exc.errno in (errno.ENOSPC, errno.EDQUOT, errno.EFBIG)
        fix = ("free disk space there or choose another folder" if full
               else "choose a folder you can write to")
    reason = exc.strerror or exc.__class__.__name__
    return UserError(f"Cannot write {path} ({reason}); {fix}.")


def atomic_write_bytes(path: str | Path, data: bytes, fix: str | None = None) -> None:
    """Write ``data`` to ``path`` through a temporary file and a rename: readers see the old
    file or the new one, never a part. An OSError (full disk, read-only folder) becomes
    ``write_error(path, exc, fix)``."""
    path = Path(path)
    try:
        path.parent.mkdir(parents=True, exist_ok=True)
        fd, tmp = tempfile.mkstemp(dir=path.parent, prefix=f".{path.name}.", suffix=".tmp")
    except OSError as exc:
        raise write_error(path, exc, fix) from None
    try:
        os.chmod(tmp, 0o666 & ~_umask())  # mkstemp makes 0600; files get the usual mode
        with os.fdopen(fd, "wb") as handle:
            handle.write(data)
            handle.flush()
            os.fsync(handle.fileno())
        os.replace(tmp, path)
    except BaseException as exc:
        Path(tmp).unlink(missing_ok=True)
        if isinstance(exc, OSError):
            raise write_error(path, exc, fix) from None
        raise


def atomic_write_text(path: str | Path, text: str, fix: str | None = None) -> None:
    """``atomic_write_bytes`` of ``text`` in UTF-8."""
    atomic_write_bytes(path, text.encode("utf-8"), fix)


@contextmanager
def atomic_folder(folder: str | Path, replace: bool = True, fix: str | None = None):
    """Fill a temporary sibling of ``folder``, then move it into place in one rename.

    Yields the temporary folder. On an error inside the block it is removed and ``folder`` is
    untouched (an OSError there, e.g. a full disk, becomes ``write_error``). With
    ``replace=False`` an existing ``folder`` (written meanwhile by another process with the
    same content) is kept and the new copy dropped. With ``replace=True`` the old folder is
    first renamed aside, so a crash between the two renames leaves it recoverable, never a
    missing folder with nothing to restore.
    """
    folder = Path(folder)
    try:
        folder.parent.mkdir(parents=True, exist_ok=True)
        tmp = Path(tempfile.mkdtemp(dir=folder.parent, prefix=f".{folder.name}.",
                                    suffix=".tmp"))
        os.chmod(tmp, 0o777 & ~_umask())  # mkdtemp makes 0700; folders get the usual mode
    except OSError as exc:
        raise write_error(folder, exc, fix) from None
    try:
        yield tmp
    except BaseException as exc:
        shutil.rmtree(tmp, ignore_errors=True)
        if isinstance(exc, OSError):
            raise write_error(folder, exc, fix) from None
        raise
    try:
        os.replace(tmp, folder)  # succeeds when folder is absent (or an empty folder)
        return
    except OSError:
        if not replace:  # another process published the same entry first
            shutil.rmtree(tmp, ignore_errors=True)
            return
    aside = folder.with_name(f".{folder.name}.old{os.getpid()}")
    shutil.rmtree(aside, ignore_errors=True)
    try:
        os.replace(folder, aside)
        os.replace(tmp, folder)
    except OSError as exc:
        shutil.rmtree(tmp, ignore_errors=True)
        raise write_error(folder, exc, fix) from None
    shutil.rmtree(aside, ignore_errors=True)


# --- a user's files ----------------------------------------------------------------------
def _kind(mode: int) -> str:
    if stat.S_ISDIR(mode):
        return "a folder"
    if stat.S_ISFIFO(mode):
        return "a named pipe (FIFO)"
    if stat.S_ISCHR(mode) or stat.S_ISBLK(mode):
        return "a device"
    if stat.S_ISSOCK(mode):
        return "a socket"
    return "not a regular file"


def open_regular(path: str | Path, what: str = "File", fix: str = "give a regular file"):
    """``path`` opened for binary reading, following links; UserError unless it is a regular
    file.

    Opened without blocking and checked on the open handle, so a FIFO (which would wait for a
    writer forever), a device, a socket or a folder is refused at once, and the file read is
    the file checked. ``what`` names the file in messages ("Predictions file", ...).

    >>> open_regular("/dev/null", "Data file")
    Traceback (most recent call last):
    ...
    tabpar.common.errors.UserError: Data file /dev/null is a device, not a regular file; give a regular file.
    """
    path = Path(path)
    try:
        fd = os.open(path, os.O_RDONLY | os.O_NONBLOCK | getattr(os, "O_CLOEXEC", 0))
    except FileNotFoundError:
        raise UserError(f"{what} {path} does not exist; check the path.") from None
    except OSError as exc:
        if exc.errno == errno.ENXIO:  # opening a socket
            raise UserError(f"{what} {path} is a socket, not a regular file; {fix}.") from None
        raise UserError(f"{what} {path} cannot be read ({exc.strerror}); check the path and "
                        f"its permissions.") from None
    mode = os.fstat(fd).st_mode
    if not stat.S_ISREG(mode):
        os.close(fd)
        raise UserError(f"{what} {path} is {_kind(mode)}, not a regular file; {fix}.")
    os.set_blocking(fd, True)
    return os.fdopen(fd, "rb")


def read_bounded(path: str | Path, what: str = "File", limit: int = MAX_TEXT_BYTES,
                 fix: str = "give a regular file") -> bytes:
    """The bytes of the regular file ``path``; UserError when it is not one or exceeds
    ``limit`` bytes."""
    with open_regular(path, what, fix) as handle:
        data = handle.read(limit + 1)
    if len(data) > limit:
        raise UserError(f"{what} {path} is larger than {limit / 2**20:g} MiB, far more than "
                        f"such a file holds; check that it is the right file.")
    return data


def read_header_line(handle, path: str | Path, limit: int = MAX_HEADER_BYTES) -> bytes:
    """The first line of a text table (at most ``limit`` bytes); UserError when it is longer."""
    line = handle.readline(limit + 1)
    if len(line) > limit and not line.endswith(b"\n"):
        raise UserError(f"The header line of {path} is longer than {limit / 2**20:g} MiB, so "
                        f"it is not a table tabpar can read; check the file (at most "
                        f"{MAX_COLUMNS:,} columns).")
    return line


# --- state files tabpar wrote ------------------------------------------------------------
def read_state_json(path: str | Path, fix: str, kind: type = dict, what: str | None = None):
    """The JSON value of a state file tabpar wrote, checked to be of ``kind``.

    ``fix`` says what to do when the file is missing, not a regular file, torn or of another
    JSON type (e.g. "delete it and run again"); the UserError names the file.

    >>> read_state_json("/nonexistent/run.json", "run again with another --out")
    Traceback (most recent call last):
    ...
    tabpar.common.errors.UserError: /nonexistent/run.json is missing; run again with another --out.
    """
    path = Path(path)
    label = what or str(path)
    try:
        data = read_bounded(path, label, fix=fix)
    except UserError as exc:
        if not os.path.lexists(path):
            raise UserError(f"{label} is missing; {fix}.") from None
        raise exc from None
    try:
        value = json.loads(data.decode("utf-8"))
    except (UnicodeDecodeError, ValueError, RecursionError):
        raise UserError(f"{label} is torn or not JSON (an interrupted write, or edited); "
                        f"{fix}.") from None
    if not isinstance(value, kind):
        raise UserError(f"{label} holds a JSON {_json_type(value)} where tabpar wrote a "
                        f"JSON {_json_type(kind())}; {fix}.")
    return value


def _json_type(value) -> str:
    return {dict: "object", list: "array", str: "string", bool: "true/false",
            type(None): "null"}.get(type(value), "number")


NUMBER = "number"  # a check_fields type: int or float, not bool
NUMBER_OR_NULL = "number or null"
TEXT_OR_NULL = "text or null"


def check_fields(record: dict, fields: dict, where: str, fix: str) -> dict:
    """UserError unless ``record`` has every key of ``fields`` with a value of its type.

    ``fields`` maps a key to a Python type (``str``, ``int``, ``bool``, ``dict``, ``list``) or
    to ``NUMBER``, ``NUMBER_OR_NULL``, ``TEXT_OR_NULL``; ``bool`` is never taken for a number
    (JSON ``true`` is not 1) nor text for a bool (``"no"`` is not false).

    >>> check_fields({"seed": "1"}, {"seed": int}, "line 3 of jobs.jsonl", "delete that line")
    Traceback (most recent call last):
    ...
    tabpar.common.errors.UserError: line 3 of jobs.jsonl has seed '1', not a whole number; delete that line.
    """
    for key, kind in fields.items():
        if key not in record:
            raise UserError(f"{where} lacks '{key}'; {fix}.")
        value = record[key]
        if not _is(value, kind):
            raise UserError(f"{where} has {key} {value!r:.60}, not {_describe(kind)}; {fix}.")
    return record


def _is(value, kind) -> bool:
    if kind in (NUMBER, NUMBER_OR_NULL):
        return ((value is None and kind == NUMBER_OR_NULL)
                or (isinstance(value, (int, float)) and not isinstance(value, bool)))
    if kind == TEXT_OR_NULL:
        return value is None or isinstance(value, str)
    if kind is int:
        return isinstance(value, int) and not isinstance(value, bool)
    return isinstance(value, kind)


def _describe(kind) -> str:
    names = {str: "text", int: "a whole number", bool: "true or false", dict: "a JSON object",
             list: "a JSON array", NUMBER: "a number", NUMBER_OR_NULL: "a number or null",
             TEXT_OR_NULL: "text or null"}
    return names.get(kind, kind if isinstance(kind, str) else kind.__name__)


def read_state_parquet(path: str | Path, fix: str, what: str | None = None):
    """A Parquet state file as a DataFrame; UserError naming it and ``fix`` when it is missing,
    not a regular file, or truncated."""
    import pandas as pd

    label = what or str(path)
    try:
        handle = open_regular(path, label, fix)
    except UserError:
        if not os.path.lexists(path):
            raise UserError(f"{label} is missing; {fix}.") from None
        raise
    with handle:
        try:
            return pd.read_parquet(handle)
        except Exception:  # pyarrow raises several types for a torn file
            raise UserError(f"{label} is torn or not Parquet (an interrupted write, or "
                            f"edited); {fix}.") from None
