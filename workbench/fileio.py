"""Files on the ground floor: safe output files and file digests, for every layer.

Every writer in foldline goes through :func:`atomic_output` (or :func:`write_text`, built on
it), so an interrupted or failed write never leaves a partial file under the requested name, and
an existing file is overwritten only when asked.  :func:`file_sha256` is the digest the report's
provenance table and the batch summary record.
"""

from __future__ import annotations

import contextlib
import hashlib
import os
import tempfile
import threading
from collections.abc import Iterator
from pathlib import Path

from workbench.errors import InputError, OutputExistsError

__all__ = ["atomic_output", "check_writable", "write_text", "file_sha256"]

_UMASK_LOCK = threading.Lock()


def _umask() -> int:
    # os.umask can only be read by setting it; do so under a lock and restore at once.
    with _UMASK_LOCK:
        mask = os.umask(0o022)
        os.umask(mask)
    return mask


def check_writable(path: str | os.PathLike, *, force: bool = False) -> Path:
    """Check that ``path`` may be written: its folder exists and it is new unless ``force``.

    Parameters
    ----------
    path : path-like
        Output file.
    force : bool, optional
        Allow replacing an existing file.

    Returns
    -------
    Path

    Raises
    ------
    OutputExistsError
        ``path`` exists and ``force`` is false.
    InputError
        The folder does not exist, or ``path`` is a folder.
    """
    path = Path(path)
    if path.is_dir():
        raise InputError(f"{path}: is a folder; give a file name for the output")
    folder = path.parent if str(path.parent) else Path(".")
    if not folder.is_dir():
        raise InputError(f"{path}: output folder {folder} does not exist; create it first")
    if path.exists() and not force:
        raise OutputExistsError(f"{path}: exists already; pass --force to replace it, or "
                                "choose another name")
    return path


@contextlib.contextmanager
def atomic_output(path: str | os.PathLike, *, force: bool = False) -> Iterator[Path]:
    """Context manager yielding a temporary path beside ``path``; renamed into place on success.

    The temporary file is created (empty) in the same folder, so the final :func:`os.replace` is
    an atomic rename on the same file system.  If the body raises, the temporary file is removed
    and ``path`` is left as it was.  The new file gets the usual permissions (0666 less the
    umask), not the private ones of a temporary file.

    Parameters
    ----------
    path : path-like
        Final output file.
    force : bool, optional
        Replace ``path`` if it exists.  Default False.

    Yields
    ------
    Path
        Temporary file to write.

    Raises
    ------
    OutputExistsError
        ``path`` exists and ``force`` is false (checked before and again just before renaming).
    """
    path = check_writable(path, force=force)
    folder = path.parent if str(path.parent) else Path(".")
    fd, tmp_name = tempfile.mkstemp(prefix=f".{path.name}.", suffix=".tmp", dir=folder)
    os.close(fd)
    tmp = Path(tmp_name)
    try:
        yield tmp
        if path.exists() and not force:
            raise OutputExistsError(f"{path}: was created by someone else while writing; pass "
                                    "--force to replace it, or choose another name")
        os.chmod(tmp, 0o666 & ~_umask())
        os.replace(tmp, path)
    except BaseException:
        with contextlib.suppress(FileNotFoundError):
            tmp.unlink()
        raise


def write_text(path: str | os.PathLike, text: str, *, force: bool = False) -> Path:
    """Write `text` (UTF-8, ``\\n`` line ends) to `path` through :func:`atomic_output`.

    Returns the path written; raises as :func:`atomic_output` does.
    """
    with atomic_output(path, force=force) as tmp:
        with open(tmp, "w", encoding="utf-8", newline="\n") as fh:
            fh.write(text)
    return Path(path)


_CHUNK = 1 << 20


def file_sha256(path: str | os.PathLike) -> str:
    """SHA-256 (hex) of a file's bytes, read in 1 MiB chunks."""
    h = hashlib.sha256()
    with open(path, "rb") as f:
        for block in iter(lambda: f.read(_CHUNK), b""):
            h.update(block)
    return h.hexdigest()
