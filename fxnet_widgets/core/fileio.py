"""Safe file input and output shared by every writer and reader of the package.

* Every file is written to a temporary file beside its target and renamed into
  place (:func:`atomic_write_bytes`, :func:`atomic_write_text`,
  :func:`atomic_write_json`), so a crash mid-way never leaves a half-written file
  and an older file of the same name survives intact.
* JSON is read with bounds (:func:`load_json`): size, nesting depth, duplicate
  keys and the non-standard ``NaN``/``Infinity`` tokens are all errors that name
  the file.
* ``.npy`` files are read with ``allow_pickle=False`` (:func:`load_npy`).
"""

from __future__ import annotations

import json
import math
import os
import re
import shutil
import tempfile
import tokenize
import zipfile
from collections.abc import Callable
from pathlib import Path
from typing import Any

import numpy as np

__all__ = [
    "FileFormatError",
    "MAX_JSON_BYTES",
    "MAX_JSON_DEPTH",
    "atomic_write_bytes",
    "atomic_write_text",
    "atomic_write_json",
    "atomic_writer",
    "load_json",
    "load_npy",
    "load_npz_arrays",
    "read_npy_header",
    "dumps_json",
    "key_text",
    "current_umask",
    "first_line",
]

MAX_JSON_BYTES = 64 * 1024 * 1024
MAX_JSON_DEPTH = 64
_SURROGATE_ESCAPE = re.compile(r"\\u[dD][89a-fA-F]")


class FileFormatError(ValueError):
    """A file could not be read: the message starts with the file's name."""


def atomic_writer(path: str | os.PathLike[str], write: Callable[[Any], None], mode: str = "wb") -> Path:
    """Call ``write(fileobj)`` on a temporary file, then rename it to ``path``.

    The temporary file lives in the target's directory (so the rename is atomic
    on POSIX). On any exception the temporary file is removed and the old
    target, if any, is untouched. A process killed mid-way (SIGKILL, power
    loss) cannot remove its temporary file; its name carries the writer's
    process id, and the next write of the same target removes it once that
    process is gone.
    """
    path = Path(path)
    directory = path.parent if str(path.parent) else Path(".")
    remove_stale_temporaries(directory, path.name)
    fd, tmp = tempfile.mkstemp(prefix=f".{path.name}.{os.getpid()}.", suffix=".tmp", dir=directory)
    try:
        os.fchmod(fd, 0o666 & ~current_umask())  # the permissions an ordinary open() would give
        with os.fdopen(fd, mode) as fh:
            write(fh)
            fh.flush()
            os.fsync(fh.fileno())
        os.replace(tmp, path)
    except BaseException:
        try:
            os.unlink(tmp)
        except FileNotFoundError:
            pass
        raise
    return path


def remove_stale_temporaries(directory: Path, name: str, suffix: str = ".tmp") -> None:
    """Remove ``.<name>.<pid>.*<suffix>`` files or folders left by writers that no longer run."""
    if os.name != "posix":  # os.kill(pid, 0) only probes on POSIX (on Windows it terminates)
        return
    prefix = f".{name}."
    try:
        entries = [e for e in os.listdir(directory) if e.startswith(prefix) and e.endswith(suffix)]
    except OSError:
        return
    for entry in entries:
        pid = entry[len(prefix):].split(".", 1)[0]
        if not pid.isdigit() or int(pid) == os.getpid() or _process_alive(int(pid)):
            continue
        path = Path(directory) / entry
        try:
            if path.is_dir() and not path.is_symlink():
                shutil.rmtree(path)
            else:
                os.unlink(path)
        except OSError:
            pass


def _process_alive(pid: int) -> bool:
    try:
        os.kill(pid, 0)
    except ProcessLookupError:
        return False
    except (PermissionError, OverflowError, OSError):
        return True  # someone else's process, or a number we cannot check: leave its file alone
    return True


def current_umask() -> int:
    """The process's file-creation mask (read by setting and restoring it)."""
    mask = os.umask(0)
    os.umask(mask)
    return mask


def first_line(exc: BaseException) -> str:
    """The first line of an exception's message, or its type name: for one-line errors."""
    text = str(exc)
    return text.splitlines()[0] if text.strip() else type(exc).__name__


def atomic_write_bytes(path: str | os.PathLike[str], data: bytes) -> Path:
    """Write ``data`` to ``path`` atomically (temporary file + rename)."""
    return atomic_writer(path, lambda fh: fh.write(data), "wb")


def atomic_write_text(path: str | os.PathLike[str], text: str) -> Path:
    """Write UTF-8 ``text`` to ``path`` atomically."""
    return atomic_write_bytes(path, text.encode("utf-8"))


def dumps_json(obj: Any) -> str:
    """Canonical JSON text of the package (2-space indent, no NaN, newline)."""
    return json.dumps(obj, indent=2, allow_nan=False, ensure_ascii=False) + "\n"


def atomic_write_json(path: str | os.PathLike[str], obj: Any) -> Path:
    """Write ``obj`` as UTF-8 JSON to ``path`` atomically."""
    return atomic_write_text(path, dumps_json(obj))


def key_text(key: object) -> str:
    """A JSON key as it reads in a one-line message: plain if it is a simple name, else its repr."""
    if isinstance(key, str) and key.replace("-", "_").isidentifier():
        return key
    r = repr(key)
    return r if len(r) <= 40 else r[:37] + "..."


def _reject_constant(name: str) -> Any:
    raise ValueError(f"{name} is not valid JSON (numbers must be finite)")


def _finite_float(text: str) -> float:
    value = float(text)
    if not np.isfinite(value):
        raise ValueError(f"{text} is out of the float64 range (numbers must be finite)")
    return value


def _no_duplicates(pairs: list[tuple[str, Any]]) -> dict[str, Any]:
    out: dict[str, Any] = {}
    for key, value in pairs:
        if key in out:
            raise ValueError(f"duplicate key {key!r}")
        out[key] = value
    return out


def _depth(text: str) -> int:
    depth = best = 0
    in_str = esc = False
    for ch in text:
        if in_str:
            if esc:
                esc = False
            elif ch == "\\":
                esc = True
            elif ch == '"':
                in_str = False
        elif ch == '"':
            in_str = True
        elif ch in "[{":
            depth += 1
            best = max(best, depth)
        elif ch in "]}":
            depth -= 1
    return best


def load_json(path: str | os.PathLike[str], *, max_bytes: int = MAX_JSON_BYTES) -> Any:
    """Read a bounded, strict UTF-8 JSON file.

    Raises
    ------
    FileFormatError
        ``"<file>: <problem>"`` for a missing, oversized, non-UTF-8, too deeply
        nested or invalid file.
    """
    name = os.fspath(path)
    try:
        size = os.path.getsize(name)
        if size > max_bytes:
            raise FileFormatError(f"{name}: file is {size} bytes, more than the limit of {max_bytes}")
        with open(name, "rb") as fh:
            raw = fh.read(max_bytes + 1)
    except FileNotFoundError:
        raise FileFormatError(f"{name}: no such file") from None
    except IsADirectoryError:
        raise FileFormatError(f"{name}: is a directory, not a file") from None
    except PermissionError:
        raise FileFormatError(f"{name}: permission denied") from None
    try:
        text = raw.decode("utf-8")
    except UnicodeDecodeError as exc:
        raise FileFormatError(f"{name}: not UTF-8 text (byte {exc.start})") from None
    return loads_json(text, name)


def read_npy_header(fh: Any) -> tuple[tuple[int, ...], np.dtype] | None:
    """Shape and dtype from a ``.npy`` header (format 1.0 or 2.0; None for other versions)."""
    fmt = np.lib.format
    version = fmt.read_magic(fh)
    if version == (1, 0):
        shape, _, dtype = fmt.read_array_header_1_0(fh)
    elif version == (2, 0):
        shape, _, dtype = fmt.read_array_header_2_0(fh)
    else:
        return None
    return shape, dtype


def _check_npy_size(name: str) -> None:
    """Refuse a ``.npy`` whose header declares more data than the file holds.

    Without this, numpy allocates the declared size first (a 20-byte header can
    ask for terabytes). Archives and other files are left to ``np.load``.
    """
    with open(name, "rb") as fh:
        if fh.read(6) != b"\x93NUMPY":
            return
        fh.seek(0)
        header = read_npy_header(fh)
        if header is None:
            return
        shape, dtype = header
        offset = fh.tell()
        size = os.fstat(fh.fileno()).st_size
    if dtype.hasobject:
        return  # np.load refuses it without pickle
    need = math.prod(shape) * dtype.itemsize
    if need > size - offset:
        raise ValueError(
            f"the header declares shape {shape} of {dtype} ({need} bytes), but the file holds {size - offset}"
        )


MAX_NPZ_BYTES = 256 * 1024 * 1024

# what np.load raises on a damaged file (SyntaxError, TokenError: a damaged header dictionary;
# NotImplementedError: an unknown zip compression method)
_NP_LOAD_ERRORS = (ValueError, OSError, EOFError, zipfile.BadZipFile, NotImplementedError, SyntaxError,
                   tokenize.TokenError)  # fmt: skip


def _check_npz_sizes(name: str) -> None:
    """Refuse an archive whose members declare more data than they hold (or than the bound)."""
    if not zipfile.is_zipfile(name):
        return
    with zipfile.ZipFile(name) as zf:
        total = 0
        for info in zf.infolist():
            total += info.file_size
            if total > MAX_NPZ_BYTES:
                raise ValueError(f"the archive unpacks to more than {MAX_NPZ_BYTES} bytes")
            if not info.filename.endswith(".npy"):
                continue
            with zf.open(info) as fh:
                header = read_npy_header(fh)
            if header is None:
                continue
            shape, dtype = header
            need = math.prod(shape) * dtype.itemsize
            if need > info.file_size:
                raise ValueError(f"member {info.filename} declares {need} bytes but holds {info.file_size}")


def _np_load(name: str, what: str) -> Any:
    """``np.load`` without pickle, sizes checked first; every failure is one line naming the file."""
    try:
        _check_npy_size(name)
        _check_npz_sizes(name)
        return np.load(name, allow_pickle=False)
    except FileNotFoundError:
        raise FileFormatError(f"{name}: no such file") from None
    except IsADirectoryError:
        raise FileFormatError(f"{name}: is a directory, not a file") from None
    except MemoryError:
        raise FileFormatError(f"{name}: not {what} (its header declares more data than fits in memory)") from None
    except _NP_LOAD_ERRORS as exc:
        msg = first_line(exc)
        raise FileFormatError(f"{name}: not {what} ({msg})") from None


def load_npy(path: str | os.PathLike[str]) -> np.ndarray:
    """Read a ``.npy`` array without pickle; errors name the file."""
    name = os.fspath(path)
    arr = _np_load(name, "a readable .npy array")
    if not isinstance(arr, np.ndarray):
        arr.close()
        raise FileFormatError(f"{name}: expected one .npy array, not an archive")
    return arr


def load_npz_arrays(path: str | os.PathLike[str]) -> dict[str, np.ndarray]:
    """Every array of an ``.npz`` archive, without pickle and with bounded sizes; errors name the file."""
    name = os.fspath(path)
    archive = _np_load(name, "a readable .npz archive")
    if isinstance(archive, np.ndarray):
        raise FileFormatError(f"{name}: expected an .npz archive of arrays, not one .npy array")
    try:
        with archive:
            return {k: archive[k] for k in archive.files}
    except (*_NP_LOAD_ERRORS, MemoryError) as exc:
        msg = first_line(exc)
        raise FileFormatError(f"{name}: broken .npz archive ({msg})") from None


def loads_json(text: str, name: str) -> Any:
    """Parse strict JSON text (no NaN/Infinity, no duplicate keys, bounded nesting); errors start with ``name``."""
    if text.startswith("\ufeff"):
        text = text[1:]
    if _depth(text) > MAX_JSON_DEPTH:
        raise FileFormatError(f"{name}: JSON nesting deeper than {MAX_JSON_DEPTH} levels")
    try:
        obj = json.loads(
            text, object_pairs_hook=_no_duplicates, parse_constant=_reject_constant, parse_float=_finite_float
        )
    except json.JSONDecodeError as exc:
        raise FileFormatError(f"{name}: invalid JSON at line {exc.lineno} column {exc.colno}: {exc.msg}") from None
    except ValueError as exc:
        raise FileFormatError(f"{name}: {exc}") from None
    except RecursionError:
        raise FileFormatError(f"{name}: JSON nesting too deep") from None
    if _SURROGATE_ESCAPE.search(text):  # rare: only then pay for the check
        try:
            json.dumps(obj, ensure_ascii=False).encode("utf-8")
        except UnicodeEncodeError as exc:
            raise FileFormatError(
                f"{name}: a string holds the lone surrogate {exc.object[exc.start]!r}, which is not Unicode text"
            ) from None
    return obj
