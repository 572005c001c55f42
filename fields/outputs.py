"""Writing results: atomic files, point CSVs, JSON without NaN.

Every file keepclear writes goes to a temporary file in the destination folder
and is renamed into place only when complete, so an interrupted run never leaves
half a file, and a scenario file is never overwritten.
"""

from __future__ import annotations

import contextlib
import io
import json
import math
import os
import tempfile
from collections.abc import Iterable, Iterator
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
    """The probe CSV (contract header, rows in input order) as bytes.

    Every number is written as ``"%.9g" % value`` (the text ``np.savetxt`` with that
    format gives, byte for byte), by :func:`csv_rows_g9`.
    """
    table = np.column_stack([points_m, *columns])
    header = (",".join(PROBE_CSV_COLUMNS) + "\n").encode()
    if not table.shape[0]:
        return header
    return header + csv_rows_g9(table)


# ------------------------------------------------------------- "%.9g" in bulk
_G9_WIDTH = 16  # longest "%.9g" text of a finite double: "-1.23456789e-300"
with np.errstate(over="ignore"):
    _POW10 = 10.0 ** np.arange(-330, 331, dtype=float)
# Palette columns of one value: its nine digits, then these characters.
_P_DOT, _P_ZERO, _P_E, _P_EXP_SIGN, _P_EXP0, _P_EXP1, _P_EXP2, _P_MINUS, _P_NUL = range(9, 18)
_PALETTE = 18


def _g9_templates() -> tuple[NDArray[np.int64], NDArray[np.int64]]:
    """Palette indices (layouts, 16) and lengths (layouts,) of every "%.9g" layout.

    Layouts without sign: fixed notation with decimal exponent X = 0..8 and t trailing
    zeros (X * 9 + t); fixed notation with X = -1..-4 (81 + (-X - 1) * 9 + t); scientific
    notation with two or three exponent digits (117 + 9 * three + t); then 135: zero.  The
    same with a leading minus sign follow at +136.
    """
    layouts: list[list[int]] = []
    for x in range(9):
        for t in range(9):
            kept = 8 - x - t
            layouts.append(
                list(range(x + 1)) + ([_P_DOT, *range(x + 1, x + 1 + kept)] if kept > 0 else [])
            )
    for z in range(4):
        for t in range(9):
            layouts.append([_P_ZERO, _P_DOT] + [_P_ZERO] * z + list(range(9 - t)))
    for three in (0, 1):
        for t in range(9):
            kept = 8 - t
            mantissa = [0] + ([_P_DOT, *range(1, 1 + kept)] if kept else [])
            exponent = [_P_E, _P_EXP_SIGN, _P_EXP0, _P_EXP1] + ([_P_EXP2] if three else [])
            layouts.append(mantissa + exponent)
    layouts.append([_P_ZERO])
    layouts += [[_P_MINUS, *layout] for layout in layouts]
    table = np.full((len(layouts), _G9_WIDTH), _P_NUL, dtype=np.int64)
    lengths = np.zeros(len(layouts), dtype=np.int64)
    for i, layout in enumerate(layouts):
        table[i, : len(layout)] = layout
        lengths[i] = len(layout)
    return table, lengths


_G9_TEMPLATE, _G9_LENGTH = _g9_templates()
_G9_TEMPLATE32 = _G9_TEMPLATE.astype(np.int32)
_G9_SIGNED = _G9_TEMPLATE.shape[0] // 2
_G9_ZERO_LAYOUT = _G9_SIGNED - 1  # "0" (layout 135)


def _g9_exponent_tables() -> tuple[NDArray[np.uint8], NDArray[np.int64]]:
    """Exponent characters and layout bases by decimal exponent X = -330..330.

    The characters are sign, d0, d1, d2 of "e+XX" or "e-XXX" (palette columns); the base
    is the layout without its trailing zeros and sign.
    """
    chars = np.zeros((661, 4), dtype=np.uint8)
    base = np.zeros(661, dtype=np.int64)
    for x in range(-330, 331):
        digits = f"{abs(x):02d}"
        chars[x + 330] = np.frombuffer(
            ("-" if x < 0 else "+").encode() + (digits + "0" * (3 - len(digits))).encode(),
            dtype=np.uint8,
        )
        if 0 <= x <= 8:
            base[x + 330] = 9 * x
        elif -4 <= x < 0:
            base[x + 330] = 81 + 9 * (-x - 1)
        else:
            base[x + 330] = 117 + 9 * (abs(x) >= 100)
    return chars, base


_G9_EXPONENT_CHARS, _G9_LAYOUT_BASE = _g9_exponent_tables()


def format_g9(values: NDArray[np.float64]) -> tuple[NDArray[np.uint8], NDArray[np.int64]]:
    """``"%.9g" % v`` for every value, vectorised: ASCII (N, 16), NUL-padded, and lengths.

    Parameters
    ----------
    values : ndarray
        Numbers (flattened).

    Returns
    -------
    chars : ndarray, shape (N, 16), uint8
        The text of each value, left-aligned.
    lengths : ndarray, shape (N,)
        Characters used.

    Notes
    -----
    printf rounds the exact binary value to nine significant digits.  Here the value is
    scaled by a power of ten in double precision (error below 1e-6 of a unit in the ninth
    digit) and rounded to the nearest integer; where the scaled value lies within 1e-6 of
    a half (a tie could go either way), and for infinities, NaN and magnitudes outside
    1e-300..1e300, the value is formatted one by one by Python instead.  The layout rules
    are those of C's ``%g``: fixed notation for decimal exponents -4..8, scientific
    otherwise, trailing zeros and a bare point removed, exponents of at least two digits.
    """
    v = np.asarray(values, dtype=float).ravel()
    n = v.size
    a = np.abs(v)
    fast = np.isfinite(a) & (a >= 1e-300) & (a <= 1e300)
    af = np.where(fast, a, 1.0)
    e = np.floor(np.log10(af)).astype(np.int64)
    m = af * _POW10[8 - e + 330]
    low = m < 1e8  # log10 rounded up below a power of ten
    e -= low
    m[low] *= 10.0
    high = m >= 1e9
    e += high
    m[high] /= 10.0
    tie = np.abs(m - np.floor(m) - 0.5) <= 1e-6
    d = np.rint(m).astype(np.int64)
    up = d >= 1_000_000_000
    if up.any():
        d[up] //= 10
        e += up
    ok = fast & ~tie & (d >= 100_000_000) & (d < 1_000_000_000)
    zero = a == 0
    palette = np.empty((n, _PALETTE), dtype=np.uint8)
    q = np.where(ok, d, 100_000_000).astype(np.uint32)
    ten = np.uint32(10)
    trailing = np.zeros(n, dtype=np.int64)
    still = np.ones(n, dtype=bool)
    for j in range(8, -1, -1):
        r = q // ten
        digit = q - r * ten
        palette[:, j] = digit + ord("0")
        if j:
            still &= digit == 0
            trailing += still
        q = r
    ex = np.clip(e, -330, 330) + 330
    palette[:, _P_DOT] = ord(".")
    palette[:, _P_ZERO] = ord("0")
    palette[:, _P_E] = ord("e")
    palette[:, _P_EXP_SIGN : _P_EXP2 + 1] = _G9_EXPONENT_CHARS[ex]
    palette[:, _P_MINUS] = ord("-")
    palette[:, _P_NUL] = 0
    layout = _G9_LAYOUT_BASE[ex] + trailing
    layout[zero] = _G9_ZERO_LAYOUT
    layout += _G9_SIGNED * np.signbit(v)
    slow = ~(ok | zero)
    layout[slow] = _G9_ZERO_LAYOUT  # replaced below
    index = _G9_TEMPLATE32[layout]
    index += (np.arange(n, dtype=np.int32) * np.int32(_PALETTE))[:, None]
    chars = np.take(palette.reshape(-1), index)
    lengths = _G9_LENGTH[layout]
    for i in np.flatnonzero(slow):
        text = format(float(v[i]), ".9g").encode("ascii")
        chars[i] = 0
        chars[i, : len(text)] = np.frombuffer(text, dtype=np.uint8)
        lengths[i] = len(text)
    return chars, lengths


def csv_rows_g9(table: NDArray[np.float64], rows_per_block: int = 16384) -> bytes:
    """Rows of comma-separated ``"%.9g"`` numbers, each ended by a newline (bytes).

    The same text as ``np.savetxt(..., delimiter=",", fmt="%.9g")``, built in blocks of
    rows with :func:`format_g9` instead of one Python format call a row.
    """
    table = np.asarray(table, dtype=float)
    n, c = table.shape
    parts = []
    for start in range(0, n, rows_per_block):
        block = table[start : start + rows_per_block]
        count = block.size
        chars, lengths = format_g9(block.reshape(-1))
        text = np.zeros((count, _G9_WIDTH + 1), dtype=np.uint8)
        text[:, :_G9_WIDTH] = chars
        ends = np.full(count, ord(","), dtype=np.uint8)
        ends[c - 1 :: c] = ord("\n")
        text[np.arange(count), lengths] = ends
        flat = text.reshape(-1)
        parts.append(flat[flat != 0].tobytes())  # NUL only pads
    return b"".join(parts)


# ------------------------------------------------------------------ output folders
def stage_output_folder(out_dir: str | Path) -> Path:
    """A fresh, empty staging folder for outputs bound for ``out_dir``.

    Beside ``out_dir`` when it does not exist yet (so it can be renamed into place
    whole); inside it, hidden, when it does.  Checks up front that the folder can be
    written, before any computation.

    Raises
    ------
    ResourceError
        Naming ``--out`` when the path is a file, its parent folder is missing, or
        nothing can be created there.
    """
    out = Path(out_dir)
    label = str(out_dir)
    if out.exists() and not out.is_dir():
        raise ResourceError(
            f"'{label}' is a file, not a folder; give a folder", "argument", "--out"
        )
    parent = out.absolute().parent
    if not out.exists() and not parent.is_dir():
        what = "is not a folder" if parent.exists() else "does not exist"
        raise ResourceError(
            f"cannot create '{label}': '{parent}' {what}; create it first", "argument", "--out"
        )
    where = out if out.exists() else parent
    if not os.access(where, os.W_OK | os.X_OK):
        raise ResourceError(f"'{where}' cannot be written (permission denied)", "argument", "--out")
    try:
        staging = tempfile.mkdtemp(prefix=f".{out.name or 'out'}.", suffix=".partial", dir=where)
    except OSError as exc:
        raise ResourceError(
            f"'{where}' cannot be written ({exc.strerror})", "argument", "--out"
        ) from None
    return Path(staging)


def discard_staging(staging: str | Path) -> None:
    """Remove a staging folder and everything in it."""
    import shutil

    shutil.rmtree(staging, ignore_errors=True)


def publish_output_folder(
    staging: str | Path, out_dir: str | Path, protected: Iterable[str | Path]
) -> list[Path]:
    """Move the staged files into ``out_dir``; return their final paths.

    A new ``out_dir`` is the staging folder renamed (one atomic step).  Into an
    existing folder each file is renamed over its old version (each atomic), after
    checking that none would replace an input file or a folder.  On a refusal the
    staging folder is removed and nothing is written.
    """
    staging = Path(staging)
    out = Path(out_dir)
    protected = [Path(p) for p in protected]
    names = sorted(p.name for p in staging.iterdir())
    try:
        for name in names:
            target = out / name
            refuse_overwriting(target, protected)
            if target.is_dir():
                raise ResourceError(
                    f"'{target}' is a folder; cannot replace it by a file", "argument", "--out"
                )
        if not out.exists():
            umask = os.umask(0)
            os.umask(umask)
            os.chmod(staging, 0o777 & ~umask)
            try:
                os.rename(staging, out)
                return [out / n for n in names]
            except OSError:
                out.mkdir()
        for name in names:
            os.replace(staging / name, out / name)
        return [out / n for n in names]
    except OSError as exc:
        raise ResourceError(
            f"'{out}' cannot be written ({exc.strerror})", "argument", "--out"
        ) from None
    finally:
        if staging.exists():
            discard_staging(staging)


class StagedFolder:
    """Files bound for one output folder, written to a staging folder first.

    Use through :func:`staged_output_folder`; ``write(name, data)`` stages a file, and
    ``published`` holds the final paths once the block has ended without an error.
    """

    def __init__(self, path: Path) -> None:
        self.path = path
        self.published: list[Path] = []

    def write(self, name: str, data: bytes) -> None:
        """Stage one file (atomically) under ``name``."""
        atomic_write_bytes(self.path / name, data)


@contextlib.contextmanager
def staged_output_folder(
    out_dir: str | Path, protected: Iterable[str | Path] = ()
) -> Iterator[StagedFolder]:
    """Stage, then publish, the files of one output folder: all of them or none.

    The staging folder is made (and the destination checked) on entry, before any
    computation in the block; on a normal exit the staged files are moved into
    ``out_dir`` (:func:`publish_output_folder`, never over a ``protected`` input file);
    on an error, or an interrupt, the staging folder is removed and ``out_dir`` is left
    as it was.

    Yields
    ------
    StagedFolder
        Its ``published`` list holds the final paths after the block.
    """
    staged = StagedFolder(stage_output_folder(out_dir))
    try:
        yield staged
    except BaseException:
        discard_staging(staged.path)
        raise
    staged.published = publish_output_folder(staged.path, out_dir, list(protected))
