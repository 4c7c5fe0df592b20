"""Writes that survive crashes: flush to disk before renaming, and swap two folders in one step.

A rename is atomic, but without ``fsync`` a power cut right after it can
leave the new name pointing at files whose contents never reached the disk
(empty or truncated). So every writer that stages files and renames them
into place (the site, releases, the cache) first flushes what it wrote,
then flushes the folder that holds the new name. A killed process needs
none of this (the kernel keeps what was written); a power cut does.

Replacing a whole folder cannot be done with ``rename`` alone (a folder is
not renamed over a non-empty one); :func:`exchange` swaps two folders
atomically where the system can. Standard library only.
"""

from __future__ import annotations

import functools
import os
import sys
from pathlib import Path

# renameat2(2) constants, from <fcntl.h> (AT_FDCWD) and <linux/fs.h> (RENAME_EXCHANGE).
_AT_FDCWD, _RENAME_EXCHANGE = -100, 2


def fsync_path(path: Path | str, folder: bool = False) -> None:
    """Flush one file, or one folder's entries (``folder=True``), to disk.

    A folder that cannot be flushed (some file systems refuse, and Windows
    cannot open folders) is let pass; a file that cannot be is an error.
    """
    try:
        fd = os.open(path, os.O_RDONLY | (getattr(os, "O_DIRECTORY", 0) if folder else 0))
    except OSError:
        if folder:
            return
        raise
    try:
        os.fsync(fd)
    except OSError:
        if not folder:
            raise
    finally:
        os.close(fd)


def fsync_tree(root: Path | str) -> None:
    """Flush every file and folder under ``root`` (``root`` included) to disk, deepest first."""
    for folder, _subfolders, files in os.walk(root, topdown=False):
        for name in files:
            fsync_path(os.path.join(folder, name))
        fsync_path(folder, folder=True)


@functools.lru_cache(maxsize=1)
def _renameat2():
    """libc's ``renameat2`` (Linux, glibc 2.28 or later), or ``None``."""
    import ctypes

    if not sys.platform.startswith("linux"):
        return None
    try:
        function = ctypes.CDLL(None, use_errno=True).renameat2
    except (OSError, AttributeError):
        return None
    function.argtypes = [ctypes.c_int, ctypes.c_char_p, ctypes.c_int, ctypes.c_char_p, ctypes.c_uint]
    function.restype = ctypes.c_int
    return function


def exchange(a: Path | str, b: Path | str) -> bool:
    """Swap two existing paths in one atomic step; False, having changed nothing, where the system cannot.

    Linux's ``renameat2(..., RENAME_EXCHANGE)`` (kernel 3.15, glibc 2.28):
    whoever looks at either path sees the old entry or the new one, never
    none, and a crash leaves one state or the other. It fails (and this
    returns False) on other systems, older kernels, file systems without it
    (some network and FUSE ones) and under sandboxes that forbid the call;
    the caller then falls back to two renames.
    """
    function = _renameat2()
    if function is None:
        return False
    return function(_AT_FDCWD, os.fsencode(a), _AT_FDCWD, os.fsencode(b), _RENAME_EXCHANGE) == 0


def swap_in(staging: Path | str, target: Path | str, aside: Path | str) -> Path | None:
    """Put the finished folder ``staging`` at ``target``; return where the previous ``target`` now is (or None).

    With an atomic exchange (``renameat2``) the previous folder ends up at ``staging``; without it, it is
    renamed to ``aside`` first, and for the instant between the two renames ``target`` is absent. Removing
    the returned folder is the caller's business.
    """
    staging, target, aside = Path(staging), Path(target), Path(aside)
    if not os.path.lexists(target):
        os.rename(staging, target)
        return None
    if exchange(staging, target):
        return staging
    os.rename(target, aside)
    try:
        os.rename(staging, target)
    except BaseException:
        os.rename(aside, target)
        raise
    return aside
