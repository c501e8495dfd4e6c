"""A whole directory written atomically: build beside the target, then rename.

:func:`write_directory` builds the new contents in a temporary directory in the
target's parent (so every rename stays on one file system), then renames it
into place. Replacing a non-empty directory (``force``) renames the old one
away first, renames the new one in, and only then deletes the old one; if
anything fails before the new directory is in place, the old one is put back.
A failure while building removes the temporary directory, so no partial target
is ever visible.
"""

from __future__ import annotations

import os
import shutil
import tempfile
from collections.abc import Callable
from pathlib import Path

from ..fileio import current_umask, remove_stale_temporaries

__all__ = ["write_directory"]


def write_directory(target: str | os.PathLike[str], build: Callable[[Path], None], *, force: bool = False) -> Path:
    """Run ``build(tmp)`` on a fresh temporary directory and rename it to ``target``.

    Raises
    ------
    FileExistsError
        ``target`` is a non-empty directory and ``force`` is false.
    ValueError
        ``target`` is a file or a symbolic link, or its parent does not exist.
    """
    if not isinstance(force, bool):
        raise TypeError(f"force must be True or False, not {force!r}")
    target = Path(os.path.abspath(os.fspath(target)))
    name = os.fspath(target)
    parent = target.parent
    if not parent.is_dir():
        raise ValueError(f"{name}: the directory {parent} does not exist")
    if target.is_symlink():
        raise ValueError(f"{name}: must be a directory, not a symbolic link")
    if target.exists():
        if not target.is_dir():
            raise ValueError(f"{name}: must be a directory, not a file")
        if any(target.iterdir()) and not force:
            raise FileExistsError(f"{name}: the directory is not empty (use force=True or --force to replace it)")
    remove_stale_temporaries(parent, target.name, ".partial")  # left by a writer that was killed
    tmp = Path(tempfile.mkdtemp(prefix=f".{target.name}.{os.getpid()}.", suffix=".partial", dir=parent))
    try:
        build(tmp)
        os.chmod(tmp, 0o777 & ~current_umask())
    except BaseException:
        shutil.rmtree(tmp, ignore_errors=True)
        raise
    old: Path | None = None
    try:
        if target.exists() and any(target.iterdir()):
            old = Path(tempfile.mkdtemp(prefix=f".{target.name}.", suffix=".old", dir=parent))
            os.rename(target, old / "previous")
        os.replace(tmp, target)  # also replaces an empty directory (POSIX rename)
    except BaseException:
        if old is not None and (old / "previous").exists() and not target.exists():
            os.rename(old / "previous", target)
        shutil.rmtree(tmp, ignore_errors=True)
        if old is not None and not (old / "previous").exists():
            shutil.rmtree(old, ignore_errors=True)
        raise
    if old is not None:
        shutil.rmtree(old, ignore_errors=True)
    return target
