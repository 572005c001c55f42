"""Writing results: atomic files, point CSVs, JSON without NaN.

Every file keepclear writes goes to a temporary file in the destination folder
and is renamed into place only when complete, so an interrupted run never leaves
half a file, and a scenario file is never overwritten.
"""

from __future__ import annotations

import io
import json
import math
import os
import tempfile
from collections.abc import Iterable
from pathlib import Path
from typing import Any

import numpy as np
from numpy.typing import NDArray

from .errors import InputError, ResourceError

POINTS_HEADER = "x_m,y_m,z_m"
PROBE_CSV_COLUMNS = (
    "x_m",
    "y_m",
    "z_m",
    "e_v_m",
    "h_a_m",
    "power_density_w_m2",
    "peak_power_density_w_m2",
)
#: Largest point file accepted [rows]; beyond it the caller should split the work.
MAX_POINTS = 20_000_000
#: Largest coordinate accepted in a point file [m] (as for scenario vectors).
MAX_COORDINATE_M = 1e6


def _same_file(a: Path, b: Path) -> bool:
    if a.resolve() == b.resolve():
        return True
    try:
        return a.exists() and b.exists() and os.path.samefile(a, b)  # hard links too
    except OSError:
        return False


def refuse_overwriting(path: Path, protected: Iterable[Path]) -> None:
    """Refuse to write ``path`` if it is one of the ``protected`` inputs.

    The same file reached by another name (a symbolic or hard link, ``..``) counts.
    """
    target = Path(path)
    for p in protected:
        if _same_file(target, Path(p)):
            raise InputError("would overwrite an input file; choose another output path", str(path))


def _new_file_mode() -> int:
    """The mode an ordinary new file gets under the current umask (0o666 & ~umask)."""
    umask = os.umask(0)
    os.umask(umask)
    return 0o666 & ~umask


def atomic_write_bytes(path: str | Path, data: bytes) -> None:
    """Write ``data`` to ``path`` via a temporary file and a rename.

    The temporary file sits in the destination folder (so the rename is atomic), is
    flushed to disk before the rename, gets the mode of an ordinary new file, and is
    removed whatever interrupts the write (an error, Ctrl-C): the destination holds
    either its old content or the whole new one, never a part.

    Raises
    ------
    ResourceError
        If the folder does not exist or cannot be written.
    """
    target = Path(path)
    folder = target.parent if str(target.parent) else Path(".")
    if target.is_dir():
        raise ResourceError("is a directory; give a file name to write", str(path))
    if not folder.is_dir():
        what = "is not a folder" if folder.exists() else "does not exist"
        raise ResourceError(f"cannot be written: '{folder}' {what}", str(path))
    try:
        fd, tmp = tempfile.mkstemp(prefix=f".{target.name}.", suffix=".part", dir=folder)
    except OSError as exc:
        raise ResourceError(f"cannot be written ({exc.strerror})", str(path)) from None
    try:
        with os.fdopen(fd, "wb") as fh:
            fh.write(data)
            fh.flush()
            os.fsync(fh.fileno())
        os.chmod(tmp, _new_file_mode())
        os.replace(tmp, target)
    except BaseException as exc:
        if os.path.exists(tmp):
            os.unlink(tmp)
        if isinstance(exc, OSError):
            raise ResourceError(f"cannot be written ({exc.strerror})", str(path)) from None
        raise


def atomic_write_text(path: str | Path, text: str) -> None:
    """Write UTF-8 text atomically (see :func:`atomic_write_bytes`)."""
    atomic_write_bytes(path, text.encode("utf-8"))


def finite_json(obj: Any) -> Any:
    """Replace numpy scalars and arrays by plain Python values; refuse NaN and inf."""
    if isinstance(obj, dict):
        return {str(k): finite_json(v) for k, v in obj.items()}
    if isinstance(obj, (list, tuple)):
        return [finite_json(v) for v in obj]
    if isinstance(obj, np.ndarray):
        return finite_json(obj.tolist())
    if isinstance(obj, (np.floating, float)):
        x = float(obj)
        if not math.isfinite(x):
            raise ValueError(f"non-finite number {x!r} in output")
        return x
    if isinstance(obj, (np.integer,)):
        return int(obj)
    if isinstance(obj, np.bool_):
        return bool(obj)
    return obj


def json_text(obj: Any) -> str:
    """One JSON document, finite numbers only."""
    return json.dumps(finite_json(obj), indent=2, allow_nan=False, ensure_ascii=False)


def read_points_csv(path: str | Path) -> NDArray[np.float64]:
    """Read a point file: header ``x_m,y_m,z_m`` and one point a row [m].

    Raises
    ------
    InputError
        Naming the file and the row for a wrong header, a malformed or non-finite row.
    """
    label = str(path)
    p = Path(path)
    if not p.exists():
        raise InputError("no such file", label, "--points")
    if p.is_dir():
        raise InputError("is a directory; give a CSV file", label, "--points")
    try:
        rows = _count_rows(p)
        if rows > MAX_POINTS:
            # Refused before the file is read into memory.
            raise ResourceError(
                f"holds about {rows} points; at most {MAX_POINTS} per run: split the file",
                label,
                "--points",
            )
        raw = p.read_bytes()
    except OSError as exc:
        raise InputError(f"cannot be read ({exc.strerror})", label, "--points") from None
    try:
        text = raw.decode("utf-8-sig")
    except UnicodeDecodeError:
        raise InputError("is not UTF-8 text", label, "--points") from None
    first, _, body = text.partition("\n")
    header = first.strip().replace(" ", "")
    if header != POINTS_HEADER:
        raise InputError(
            f"the first row must be the header '{POINTS_HEADER}', got '{first.strip()[:60]}'",
            label,
            "--points",
        )
    if not body.strip():
        return np.zeros((0, 3))
    try:
        data = np.loadtxt(io.StringIO(body), delimiter=",", dtype=float, ndmin=2)
    except ValueError as exc:
        raise InputError(
            f"has a row that is not three numbers x,y,z: {exc}", label, "--points"
        ) from None
    if data.shape[1] != 3:
        raise InputError(
            f"rows must have 3 columns x_m,y_m,z_m, found {data.shape[1]}", label, "--points"
        )
    bad = ~np.all(np.isfinite(data), axis=1)
    if bad.any():
        row = int(np.argmax(bad)) + 2
        raise InputError(f"row {row} holds a value that is not a finite number", label, "--points")
    far = np.any(np.abs(data) > MAX_COORDINATE_M, axis=1)
    if far.any():
        row = int(np.argmax(far)) + 2
        raise InputError(
            f"row {row} holds a coordinate beyond {MAX_COORDINATE_M:g} m in size", label, "--points"
        )
    if data.shape[0] > MAX_POINTS:
        raise ResourceError(
            f"holds {data.shape[0]} points; at most {MAX_POINTS} per run", label, "--points"
        )
    return data


def _count_rows(path: Path, block_bytes: int = 1 << 20) -> int:
    """Data rows of a text file (line breaks after the header), read in bounded blocks."""
    breaks = 0
    last = b"\n"
    with path.open("rb") as fh:
        while block := fh.read(block_bytes):
            breaks += block.count(b"\n")
            last = block[-1:]
    lines = breaks + (last != b"\n")
    return max(0, lines - 1)


def probe_csv_bytes(points_m: NDArray[np.float64], columns: Iterable[NDArray[np.float64]]) -> bytes:
    """The probe CSV (contract header, rows in input order) as bytes."""
    table = np.column_stack([points_m, *columns])
    buf = io.BytesIO()
    buf.write((",".join(PROBE_CSV_COLUMNS) + "\n").encode())
    if table.shape[0]:
        np.savetxt(buf, table, delimiter=",", fmt="%.9g")
    return buf.getvalue()
