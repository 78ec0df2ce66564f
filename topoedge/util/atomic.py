"""Writing files and folders atomically: complete under their name, or not there at all.

One writer for every file of the project: :func:`atomic_file` (a temporary
sibling renamed into place, fsynced by :func:`write_atomic`), and
:func:`write_folder` for whole results folders (a hidden temporary sibling
folder renamed into place once every file is complete). An existing folder
is refused before any computation unless asked to be replaced
(:func:`check_destination`).
"""

from __future__ import annotations

import contextlib
import os
import re
import shutil
import tempfile
from collections.abc import Callable
from pathlib import Path

from .jsonio import dumps

__all__ = ["ResultsExistError", "check_destination", "atomic_file", "write_atomic", "write_folder", "write_json",
           "remove_stale", "temp_prefix"]


class ResultsExistError(FileExistsError):
    """The results folder exists and overwriting was not requested."""


def check_destination(out: Path, *, force: bool) -> None:
    """Refuse an existing results folder unless ``force``; call before computing."""
    if out.exists() and not force:
        raise ResultsExistError(
            f"results folder '{out}' already exists; choose another --out or pass --force to replace it"
        )
    if out.exists() and not out.is_dir():
        raise ResultsExistError(f"'{out}' exists and is not a folder; choose another --out")
    parent = out.parent
    while not parent.exists() and parent != parent.parent:
        parent = parent.parent
    if not parent.is_dir():
        raise ResultsExistError(f"results folder '{out}': '{parent}' is a file, not a folder; choose another --out")
    try:   # a real probe: permissions alone do not tell (read-only mounts, /proc, root)
        Path(tempfile.mkdtemp(prefix=temp_prefix("write-probe"), dir=parent)).rmdir()
    except OSError as err:
        raise ResultsExistError(f"results folder '{out}': cannot write in '{parent}' ({err.strerror or err}); "
                                "choose another --out") from None


def temp_prefix(name: str, what: str = "partial") -> str:
    """Prefix of a temporary sibling of ``name``: hidden, and naming the process that owns it."""
    return f".{name}.{what}-{os.getpid()}-"


_STALE = re.compile(r"^\..+\.(partial|old)-(\d+)-[^/]*$")


def _alive(pid: int) -> bool:
    if pid == os.getpid():
        return True
    try:
        os.kill(pid, 0)
    except ProcessLookupError:
        return False
    except PermissionError:   # another user's process
        return True
    return True


def remove_stale(folder: Path) -> list[Path]:
    """Remove the temporary files and folders of processes that died while writing into ``folder``.

    A writer killed before it could clean up (SIGKILL, power loss) leaves
    its hidden ``.<name>.partial-<pid>-*`` (or ``.old-``) sibling behind; the
    next writer into the same folder removes those whose process is gone.
    Temporaries of running processes are left alone. Returns what was removed.
    """
    removed = []
    try:
        entries = list(Path(folder).iterdir())
    except OSError:
        return removed
    for entry in entries:
        match = _STALE.match(entry.name)
        if match is None or _alive(int(match.group(2))):
            continue
        if entry.is_dir() and not entry.is_symlink():
            shutil.rmtree(entry, ignore_errors=True)
        else:
            entry.unlink(missing_ok=True)
        removed.append(entry)
    return removed


@contextlib.contextmanager
def atomic_file(path: Path):
    """Yield a temporary sibling of ``path`` to write; rename it into place on success.

    The file appears under its name complete or not at all: on any error
    (or Ctrl-C) the temporary file is removed. It gets the permissions of a
    plain new file (``mkstemp`` would leave it 0600).
    """
    path = Path(path)
    fd, tmp = tempfile.mkstemp(prefix=temp_prefix(path.name), dir=path.parent)
    os.close(fd)
    try:
        yield Path(tmp)
        umask = os.umask(0)
        os.umask(umask)
        os.chmod(tmp, 0o666 & ~umask)
        os.replace(tmp, path)
    except BaseException:
        Path(tmp).unlink(missing_ok=True)
        raise


def write_folder(out: Path, files: dict[str, Callable[[Path], None]], *, force: bool = False) -> Path:
    """Write a results folder atomically.

    Every function of ``files`` writes its file into a hidden temporary
    sibling folder; only when all have succeeded is the folder renamed to
    ``out`` (replacing an existing one only with ``force``, and putting it
    back if the rename fails). On any error nothing is left behind.

    Parameters
    ----------
    out : Path
        Final folder name.
    files : dict
        File name -> function writing that file to the path it is given.
    force : bool
        Replace an existing folder.

    Returns
    -------
    Path
        ``out``.
    """
    out = Path(out)
    check_destination(out, force=force)
    out.parent.mkdir(parents=True, exist_ok=True)
    remove_stale(out.parent)
    tmp = Path(tempfile.mkdtemp(prefix=temp_prefix(out.name), dir=out.parent))
    try:
        # mkdtemp creates the folder 0700; give it the permissions of a plain mkdir.
        umask = os.umask(0)
        os.umask(umask)
        tmp.chmod(0o777 & ~umask)
        for name, write in files.items():
            write(tmp / name)
        if out.exists():
            old = Path(tempfile.mkdtemp(prefix=temp_prefix(out.name, "old"), dir=out.parent))
            os.replace(out, old / out.name)
            try:
                os.replace(tmp, out)
            except BaseException:
                os.replace(old / out.name, out)  # put the earlier results back
                old.rmdir()
                raise
            shutil.rmtree(old, ignore_errors=True)
        else:
            os.replace(tmp, out)
    except BaseException:
        shutil.rmtree(tmp, ignore_errors=True)
        raise
    return out


def write_json(summary) -> Callable[[Path], None]:
    """A file writer for :func:`write_folder` that stores ``summary`` (a dict or a record with
    ``to_dict()``) as JSON, NaN and infinities as null."""
    return lambda path: path.write_text(dumps(summary, indent=2, sort_keys=False) + "\n")


def write_atomic(path: Path, data: str | bytes) -> None:
    """Write a whole file through :func:`atomic_file`, flushed to disk before the rename."""
    with atomic_file(path) as tmp, open(tmp, "wb" if isinstance(data, bytes) else "w") as f:
        f.write(data)
        f.flush()
        os.fsync(f.fileno())
