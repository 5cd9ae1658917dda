"""Writes that never leave a half-written file or folder behind."""
from __future__ import annotations

import os
import shutil
import tempfile
from contextlib import contextmanager
from pathlib import Path


def _umask() -> int:
    mask = os.umask(0)
    os.umask(mask)
    return mask


def atomic_write_bytes(path: str | Path, data: bytes) -> None:
    """Write ``data`` to ``path`` through a temporary file and a rename: readers see the old
    file or the new one, never a part."""
    path = Path(path)
    path.parent.mkdir(parents=True, exist_ok=True)
    fd, tmp = tempfile.mkstemp(dir=path.parent, prefix=f".{path.name}.", suffix=".tmp")
    try:
        os.chmod(tmp, 0o666 & ~_umask())  # mkstemp makes 0600; files get the usual mode
        with os.fdopen(fd, "wb") as handle:
            handle.write(data)
            handle.flush()
            os.fsync(handle.fileno())
        os.replace(tmp, path)
    except BaseException:
        Path(tmp).unlink(missing_ok=True)
        raise


def atomic_write_text(path: str | Path, text: str) -> None:
    """``atomic_write_bytes`` of ``text`` in UTF-8."""
    atomic_write_bytes(path, text.encode("utf-8"))


@contextmanager
def atomic_folder(folder: str | Path, replace: bool = True):
    """Fill a temporary sibling of ``folder``, then move it into place in one rename.

    Yields the temporary folder. On an error inside the block it is removed and ``folder`` is
    untouched. With ``replace=False`` an existing ``folder`` (written meanwhile by another
    process with the same content) is kept and the new copy dropped. With ``replace=True`` the
    old folder is first renamed aside, so a crash between the two renames leaves it recoverable,
    never a missing folder with nothing to restore.
    """
    folder = Path(folder)
    folder.parent.mkdir(parents=True, exist_ok=True)
    tmp = Path(tempfile.mkdtemp(dir=folder.parent, prefix=f".{folder.name}.", suffix=".tmp"))
    os.chmod(tmp, 0o777 & ~_umask())  # mkdtemp makes 0700; folders get the usual mode
    try:
        yield tmp
    except BaseException:
        shutil.rmtree(tmp, ignore_errors=True)
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
    os.replace(folder, aside)
    os.replace(tmp, folder)
    shutil.rmtree(aside, ignore_errors=True)
