"""Atomic writes: a target is either the old complete file or the new complete one.

Exports and reports never write into their target directly. A file is written
to a temporary file in the target's own folder (so the final rename stays on
one file system), flushed, fsynced, then renamed over the target with
``os.replace``, and the folder is fsynced so the rename itself survives a
power cut. A crash at any moment leaves the old target untouched (plus, at
worst, a stray ``.<name>.keyproof-*`` temporary file beside it, never a half
file under the target's name).

A folder (a Data Package) cannot be renamed over a non-empty folder, so
"atomic" means something slightly weaker there, and we say exactly what:

- the new folder is built completely, every file fsynced, in a temporary
  folder beside the target;
- where the kernel offers it (Linux ``renameat2`` with ``RENAME_EXCHANGE``)
  the two folders are swapped in one atomic step, then the old one is
  removed: at every instant the target name holds a complete folder;
- elsewhere the old folder is first renamed aside (``.<name>.keyproof-old-*``)
  and the new one renamed in: a crash between the two renames leaves no folder
  under the target name, but the complete old folder beside it — never a
  partial folder under the target name.

The trade-off: the temporary copy needs as much free space as the output.
"""

from __future__ import annotations

import contextlib
import ctypes
import ctypes.util
import os
import shutil
import tempfile
from collections.abc import Callable, Iterator
from pathlib import Path

_PREFIX = ".keyproof-"


def _fsync_dir(folder: Path) -> None:
    # Directories cannot be opened for fsync on every platform (Windows).
    try:
        fd = os.open(folder, os.O_RDONLY)
    except OSError:
        return
    try:
        os.fsync(fd)
    except OSError:
        pass
    finally:
        os.close(fd)


def _fsync_file(path: Path) -> None:
    with open(path, "rb+") as fh:
        fh.flush()
        os.fsync(fh.fileno())


@contextlib.contextmanager
def AtomicFile(path: str | os.PathLike) -> Iterator[Path]:  # noqa: N802 - reads as a class
    """Give a temporary path beside ``path``; on success, move it over ``path``.

    Write the complete new file to the path yielded. When the block ends
    without an exception the file is fsynced and renamed over the target;
    when it raises, the temporary file is removed and the target is untouched.

    >>> import tempfile, pathlib
    >>> target = pathlib.Path(tempfile.mkdtemp()) / "out.txt"
    >>> with AtomicFile(target) as tmp:
    ...     _ = tmp.write_text("complete")
    >>> target.read_text()
    'complete'
    """
    target = Path(path)
    folder = target.parent if str(target.parent) else Path(".")
    fd, name = tempfile.mkstemp(prefix=f".{target.name}{_PREFIX}", suffix=".tmp", dir=folder)
    os.close(fd)
    tmp = Path(name)
    try:
        yield tmp
        _fsync_file(tmp)
        os.replace(tmp, target)
        _fsync_dir(folder)
    except BaseException:
        with contextlib.suppress(OSError):
            tmp.unlink()
        raise


def atomic_write(path: str | os.PathLike, write_fn: Callable[[Path], object]) -> Path:
    """Call ``write_fn(tmp_path)`` to write the file, then move it over ``path`` atomically.

    Returns ``path`` as a :class:`~pathlib.Path`.

    >>> import tempfile, pathlib
    >>> target = pathlib.Path(tempfile.mkdtemp()) / "a.csv"
    >>> atomic_write(target, lambda p: p.write_text("x\\n1\\n")).read_text()
    'x\\n1\\n'
    """
    target = Path(path)
    with AtomicFile(target) as tmp:
        write_fn(tmp)
    return target


def atomic_text(path: str | os.PathLike, text: str) -> Path:
    """Write ``text`` (UTF-8) to ``path`` atomically.

    >>> import tempfile, pathlib
    >>> atomic_text(pathlib.Path(tempfile.mkdtemp()) / "r.md", "# r\\n").name
    'r.md'
    """
    return atomic_write(path, lambda p: p.write_text(text, encoding="utf-8", newline=""))


def atomic_folder(path: str | os.PathLike, build_fn: Callable[[Path], object]) -> Path:
    """Build a folder with ``build_fn(tmp_folder)`` beside ``path``, then swap it in.

    See the module docstring for what "atomic" means for a folder. An
    existing non-folder at ``path`` is refused with ``FileExistsError``.

    >>> import tempfile, pathlib
    >>> target = pathlib.Path(tempfile.mkdtemp()) / "pkg"
    >>> _ = atomic_folder(target, lambda d: (d / "a.txt").write_text("1"))
    >>> sorted(p.name for p in target.iterdir())
    ['a.txt']
    """
    target = Path(path)
    parent = target.parent if str(target.parent) else Path(".")
    if target.exists() and not target.is_dir():
        raise FileExistsError(target)
    tmp = Path(tempfile.mkdtemp(prefix=f".{target.name}{_PREFIX}new-", dir=parent))
    try:
        build_fn(tmp)
        for file in tmp.rglob("*"):
            if file.is_file():
                _fsync_file(file)
        _fsync_dir(tmp)
        if target.exists():
            old = _swap_in(tmp, target, parent)
        else:
            os.rename(tmp, target)
            old = None
        _fsync_dir(parent)
    except BaseException:
        shutil.rmtree(tmp, ignore_errors=True)
        raise
    if old is not None:
        shutil.rmtree(old, ignore_errors=True)
    return target


def _swap_in(new: Path, target: Path, parent: Path) -> Path:
    """Put ``new`` at ``target``; return where the old folder now is (to remove)."""
    if _exchange(new, target):
        return new  # after the exchange, the old folder lives under the temp name
    old = Path(tempfile.mkdtemp(prefix=f".{target.name}{_PREFIX}old-", dir=parent))
    os.rmdir(old)
    os.rename(target, old)
    os.rename(new, target)
    return old


_RENAME_EXCHANGE = 2
_AT_FDCWD = -100


def _exchange(a: Path, b: Path) -> bool:
    """Swap two paths atomically with Linux ``renameat2``; False where unavailable."""
    try:
        libc = ctypes.CDLL(ctypes.util.find_library("c") or None, use_errno=True)
        renameat2 = libc.renameat2
    except (OSError, AttributeError):
        return False
    renameat2.argtypes = [ctypes.c_int, ctypes.c_char_p, ctypes.c_int, ctypes.c_char_p,
                          ctypes.c_uint]
    result = renameat2(_AT_FDCWD, os.fsencode(a), _AT_FDCWD, os.fsencode(b), _RENAME_EXCHANGE)
    return result == 0
