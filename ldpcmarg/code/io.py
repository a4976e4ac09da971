"""Reading and writing parity-check matrices; the shipped codes.

Three file formats, chosen by extension (or, for other extensions, by the
first bytes of the file):

``.mtx`` -- Matrix Market (read with :func:`scipy.io.mmread`, written with
    :func:`scipy.io.mmwrite`). ``coordinate`` with field ``pattern``,
    ``integer`` or ``real`` and ``general`` symmetry, entries 0 or 1 (explicit
    zeros are dropped); ``array`` (dense) with 0/1 entries is read too. Indices
    are 1-based as the standard says. Duplicate coordinates are an error
    (never summed).

``.txt`` -- the ldpcmarg check-list format, one line per check::

    ldpcmarg-checks n=7 m=3
    # comment lines start with '#'; blank lines are ignored
    0 2 4 6
    1 2 5 6
    3 4 5 6

  The first line is the header ``ldpcmarg-checks n=<bits> m=<checks>``. Then
  exactly ``m`` check lines follow, in check order; each lists the 0-based
  indices of the bits in that check, separated by spaces (any order, no
  repeats). A check on no bit (an all-zero row) is written as a single ``-``.
  Bits that appear in no line are legal (zero-weight columns).

``.npz`` -- :func:`scipy.sparse.save_npz` files (CSR, CSC or COO). The
  archive is read member by member without pickles; each ``.npy`` header must
  describe exactly the bytes that follow, index arrays must be integers, and
  ``indptr`` must start at 0, never decrease and end at the number of stored
  entries, all checked on the raw arrays before any matrix is built.

Strictness and size: numbers in the text formats are plain ASCII decimals
(``[0-9]+``; no sign, no ``_``, no other digit characters, at most 18
digits). Only regular files are read (a FIFO or device is refused at once).
Zero rows and zero-weight columns are legal, but a file may declare at most
``4 * (entries equal to 1) + 4096`` rows plus columns, so memory stays bounded
by what the file holds; the code model's memory is then estimated against
:func:`ldpcmarg._memory.memory_budget` before it is built
(:class:`~ldpcmarg.errors.ResourceError` when it does not fit).

Every malformed input raises :class:`~ldpcmarg.errors.CodeFileError` with one
message naming the file and the line or entry: missing file, unparsable line,
value other than 0/1, duplicate entry, index out of range, empty matrix, wrong
header.

Shipped codes live in the package folder ``ldpcmarg/codes`` (``<name>.txt``
or ``<name>.mtx`` plus a card ``<name>.md``); :func:`load_code` resolves their
names before paths, also from a non-editable install.
"""

from __future__ import annotations

import io
import os
import re
import stat
import zipfile
import zlib
from array import array
from importlib import resources
from pathlib import Path

import numpy as np
import numpy.lib.format as npformat
import scipy.io
import scipy.sparse as sp

from .._memory import require_memory
from ..errors import CodeFileError, InputError, LdpcmargError
from .parity_check import ParityCheckCode

__all__ = ["load_code", "save_code", "shipped_codes", "shipped_code_dir", "FORMATS",
           "read_checks_text", "write_checks_text"]

#: Extension -> format name.
FORMATS = {".mtx": "mtx", ".txt": "txt", ".npz": "npz"}

TEXT_HEADER = "ldpcmarg-checks"
_HEADER_RE = re.compile(rf"{TEXT_HEADER}[ \t]+n=([0-9]+)[ \t]+m=([0-9]+)", re.ASCII)


# ------------------------------------------------------------- shipped codes
def shipped_code_dir():
    """The folder of shipped codes (an ``importlib.resources`` Traversable)."""
    return resources.files("ldpcmarg") / "codes"


def _shipped_files() -> dict[str, object]:
    out = {}
    try:
        entries = list(shipped_code_dir().iterdir())
    except (FileNotFoundError, NotADirectoryError):
        return out
    for entry in entries:
        name = entry.name
        for ext in (".txt", ".mtx", ".npz"):
            if name.endswith(ext) and not name.startswith("_"):
                out[name[: -len(ext)]] = entry
    return dict(sorted(out.items()))


def shipped_codes() -> list[dict]:
    """The shipped codes with the summary line of each card.

    Returns
    -------
    list of dict
        ``{"name", "file", "summary", "card"}`` per code (card = full markdown
        text, "" if missing), sorted by name.
    """
    out = []
    base = shipped_code_dir()
    for name, entry in _shipped_files().items():
        card_entry = base / f"{name}.md"
        try:
            card = card_entry.read_text(encoding="utf-8")
        except (FileNotFoundError, OSError):
            card = ""
        summary = ""
        for line in card.splitlines():
            s = line.strip()
            if s and not s.startswith("#"):
                summary = s
                break
        out.append({"name": name, "file": entry.name, "summary": summary, "card": card})
    return out


# ---------------------------------------------------------------- reading
#: Largest number of decimal digits accepted for a size or an index (< 2**63).
MAX_DIGITS = 18

#: A file may declare at most this many rows plus columns per stored one, plus
#: :data:`EMPTY_SLACK`: zero rows and zero-weight columns are legal, but a
#: 44-byte file declaring ``n = 100000000`` would make every later step
#: allocate gigabytes for bits that the file does not describe.
ROWS_COLS_PER_ONE = 4
EMPTY_SLACK = 4096

#: Estimated bytes the code model needs per bit or check and per edge (the
#: CSR matrix, the Tanner-graph arrays and their variable-major copies).
_BYTES_PER_NODE = 48
_BYTES_PER_EDGE = 64

_UINT_RE = re.compile(r"[0-9]+", re.ASCII)
_INT_RE = re.compile(r"[+-]?[0-9]+", re.ASCII)
_REAL_RE = re.compile(r"[+-]?([0-9]+\.?[0-9]*|\.[0-9]+)([eE][+-]?[0-9]+)?", re.ASCII)
_FIELD_SEP = re.compile(r"[ \t]+")


def _err(path, where: str, what: str) -> CodeFileError:
    loc = f"{path}, {where}" if where else f"{path}"
    return CodeFileError(f"{loc}: {what}")


def check_regular_file(path, err=None) -> int:
    """Refuse anything but a regular file (FIFO, device, socket) before opening it.

    Opening a FIFO blocks until a writer appears, and a character device may
    never end, so readers check this first. Returns the size in bytes.
    """
    err = err or (lambda what: CodeFileError(f"{path}: {what}"))
    try:
        st = os.stat(path)
    except OSError as exc:
        raise err(f"cannot read the file ({exc.strerror}).") from None
    if stat.S_ISDIR(st.st_mode):
        raise err("is a directory, not a file.")
    if not stat.S_ISREG(st.st_mode):
        kind = ("a named pipe (FIFO)" if stat.S_ISFIFO(st.st_mode) else
                "a device" if stat.S_ISCHR(st.st_mode) or stat.S_ISBLK(st.st_mode) else
                "a socket" if stat.S_ISSOCK(st.st_mode) else "not a regular file")
        raise err(f"is {kind}, not a regular file; save the data to a file first.")
    return int(st.st_size)


def _read_text(path: Path) -> str:
    check_regular_file(path)
    try:
        raw = path.read_bytes()
    except OSError as exc:
        raise _err(path, "", f"cannot read the file ({exc.strerror}).") from None
    try:
        return raw.decode("utf-8")
    except UnicodeDecodeError as exc:
        raise _err(path, "", f"not a text file ({exc.reason} at byte {exc.start}).") from None


def _lines(text: str) -> list[str]:
    # only \n (and \r\n) end a line: str.splitlines would also split on form
    # feeds and Unicode separators, which have no place in these formats
    return [ln[:-1] if ln.endswith("\r") else ln for ln in text.split("\n")]


def _parse_uint(tok: str) -> int | None:
    """A plain ASCII decimal ``[0-9]+`` of at most MAX_DIGITS digits, else None.

    ``int()`` alone would accept ``+0``, ``6_0`` (= 60) and non-ASCII digits.
    """
    if not _UINT_RE.fullmatch(tok) or len(tok) > MAX_DIGITS:
        return None
    return int(tok)


def _too_long(tok: str) -> bool:
    return bool(_UINT_RE.fullmatch(tok)) and len(tok) > MAX_DIGITS


def read_checks_text(path) -> tuple[np.ndarray, np.ndarray, tuple[int, int]]:
    """Parse the ldpcmarg check-list format.

    Sizes and bit indices are plain ASCII decimals (``[0-9]+``, at most
    :data:`MAX_DIGITS` digits); signs, underscores and other digit characters
    are errors.

    Returns
    -------
    rows, cols : ndarray of int64
        Coordinates of the ones.
    shape : (m, n)
    """
    path = Path(path)
    lines = _lines(_read_text(path))
    if lines and lines[-1] == "":
        lines.pop()
    if not lines:
        raise _err(path, "line 1", f"empty file; expected the header '{TEXT_HEADER} n=<n> m=<m>'.")
    head = lines[0].strip(" \t")
    mt = _HEADER_RE.fullmatch(head)
    if not mt:
        raise _err(path, "line 1",
                   f"wrong header {head[:60]!r}; expected '{TEXT_HEADER} n=<bits> m=<checks>' "
                   "with plain decimal numbers.")
    n, m = _parse_uint(mt.group(1)), _parse_uint(mt.group(2))
    if n is None or m is None:
        raise _err(path, "line 1", f"the declared size has more than {MAX_DIGITS} digits; "
                   "no code is that long.")
    if n == 0 or m == 0:
        raise _err(path, "line 1", f"empty matrix (n={n}, m={m}).")
    rows = array("q")
    cols = array("q")
    check = 0
    for lineno, raw in enumerate(lines[1:], start=2):
        s = raw.strip(" \t")
        if not s or s.startswith("#"):
            continue
        if check >= m:
            raise _err(path, f"line {lineno}", f"more check lines than m = {m} in the header.")
        if s == "-":
            check += 1
            continue
        seen = set()
        for tok in _FIELD_SEP.split(s):
            b = _parse_uint(tok)
            if b is None:
                if _too_long(tok):
                    raise _err(path, f"line {lineno}", f"bit index {tok[:20]}... in check "
                               f"{check} is out of range 0..{n - 1}.")
                raise _err(path, f"line {lineno}",
                           f"unparsable bit index {tok[:40]!r} in check {check} "
                           "(expected 0-based plain decimal integers separated by spaces, "
                           "or '-' for an empty check).")
            if b >= n:
                raise _err(path, f"line {lineno}",
                           f"bit index {b} in check {check} is out of range 0..{n - 1}.")
            if b in seen:
                raise _err(path, f"line {lineno}", f"duplicate bit index {b} in check {check}.")
            seen.add(b)
            rows.append(check)
            cols.append(b)
        check += 1
    if check < m:
        raise _err(path, f"line {len(lines)}",
                   f"found {check} check lines, but the header says m = {m}.")
    if not rows:
        raise _err(path, "", "empty matrix: no check contains any bit.")
    return np.frombuffer(rows, dtype=np.int64), np.frombuffer(cols, dtype=np.int64), (m, n)


def _read_mtx(path: Path):
    """Parse a Matrix Market file strictly, naming the line of every error."""
    lines = _lines(_read_text(path))
    if not lines or not lines[0].lower().startswith("%%matrixmarket"):
        raise _err(path, "line 1", "wrong header; expected '%%MatrixMarket matrix coordinate "
                   "pattern general' (or integer/real instead of pattern).")
    parts = lines[0].split()
    if len(parts) != 5 or parts[1].lower() != "matrix":
        raise _err(path, "line 1", f"wrong header {lines[0][:70]!r}.")
    fmt, field, symm = (p.lower() for p in parts[2:])
    if fmt not in ("coordinate", "array"):
        raise _err(path, "line 1", f"unknown format {fmt[:30]!r} (expected coordinate or array).")
    if field not in ("pattern", "integer", "real"):
        raise _err(path, "line 1",
                   f"field {field[:30]!r} is not allowed; use pattern, integer or real.")
    if symm != "general":
        raise _err(path, "line 1", f"symmetry {symm[:30]!r} is not allowed; use general.")
    if fmt == "array" and field == "pattern":
        raise _err(path, "line 1", "the array format cannot have field 'pattern'.")
    i = 1
    while i < len(lines) and (not lines[i].strip() or lines[i].lstrip().startswith("%")):
        i += 1
    if i == len(lines):
        raise _err(path, "", "missing the size line.")
    size = lines[i].split()
    want = 3 if fmt == "coordinate" else 2
    dims = [_parse_uint(t) for t in size]
    if len(dims) != want or any(d is None for d in dims):
        if len(dims) == want and any(_too_long(t) for t in size):
            raise _err(path, f"line {i + 1}", f"a size has more than {MAX_DIGITS} digits; "
                       "no code is that large.")
        raise _err(path, f"line {i + 1}", f"unparsable size line {lines[i].strip()[:60]!r} "
                   f"(expected {want} non-negative plain decimal integers).")
    nrows, ncols = dims[0], dims[1]
    if nrows == 0 or ncols == 0:
        raise _err(path, f"line {i + 1}", f"empty matrix ({nrows} x {ncols}).")
    expected = dims[2] if fmt == "coordinate" else nrows * ncols
    value_re = _REAL_RE if field == "real" else _INT_RE
    rows = array("q")
    cols = array("q")
    where_line = array("q")
    count = 0
    for lineno in range(i + 2, len(lines) + 1):
        s = lines[lineno - 1].strip()
        if not s or s.startswith("%"):
            continue
        toks = s.split()
        count += 1
        if count > expected:
            raise _err(path, f"line {lineno}", f"more entries than the {expected} announced.")
        if fmt == "array":
            if len(toks) != 1:
                raise _err(path, f"line {lineno}", f"unparsable entry {s[:60]!r}.")
            vtok = toks[0]
            r, c = (count - 1) % nrows + 1, (count - 1) // nrows + 1
            where = f"line {lineno} (entry {r}, {c})"
        else:
            ntok = 2 if field == "pattern" else 3
            if len(toks) != ntok:
                raise _err(path, f"line {lineno}", f"unparsable entry {s[:60]!r} "
                           f"(expected {ntok} numbers for field {field}).")
            r, c = _parse_uint(toks[0]), _parse_uint(toks[1])
            if r is None or c is None:
                if _too_long(toks[0]) or _too_long(toks[1]):
                    raise _err(path, f"line {lineno}", "index out of range 1.."
                               f"{nrows} x 1..{ncols} (more than {MAX_DIGITS} digits).")
                raise _err(path, f"line {lineno}", f"unparsable entry {s[:60]!r} "
                           "(indices are plain decimal integers).")
            if not (1 <= r <= nrows and 1 <= c <= ncols):
                raise _err(path, f"line {lineno}", f"index ({r}, {c}) out of range "
                           f"1..{nrows} x 1..{ncols} (Matrix Market indices are 1-based).")
            vtok = toks[2] if field != "pattern" else "1"
            where = f"line {lineno}"
        if not value_re.fullmatch(vtok) or len(vtok) > 64:
            raise _err(path, where, f"unparsable value {vtok[:40]!r}.")
        v = float(vtok) if field == "real" else int(vtok)
        if v not in (0, 1):
            raise _err(path, where, f"value {vtok} is not 0 or 1.")
        if v == 1:
            rows.append(r - 1)
            cols.append(c - 1)
            where_line.append(lineno)
    if count < expected:
        raise _err(path, "", f"found {count} entries, but the size line announces {expected}.")
    if not rows:
        raise _err(path, "", "empty matrix: no entry equals 1.")
    r_arr = np.frombuffer(rows, dtype=np.int64)
    c_arr = np.frombuffer(cols, dtype=np.int64)
    if fmt == "coordinate":
        dup = _first_duplicate(r_arr, c_arr, ncols)
        if dup is not None:
            raise _err(path, f"line {where_line[dup]}",
                       f"duplicate entry ({r_arr[dup] + 1}, {c_arr[dup] + 1}).")
    return r_arr, c_arr, (nrows, ncols)


def _first_duplicate(rows: np.ndarray, cols: np.ndarray, ncols: int) -> int | None:
    """Position of the first coordinate that repeats an earlier one, or None."""
    key = rows * np.int64(ncols) + cols if ncols < (1 << 31) else None
    if key is None:  # avoid int64 overflow of the combined key
        order = np.lexsort((cols, rows))
        same = (np.diff(rows[order]) == 0) & (np.diff(cols[order]) == 0)
    else:
        order = np.argsort(key, kind="stable")
        same = np.diff(key[order]) == 0
    if not np.any(same):
        return None
    # the later occurrence of each equal pair, in file order; report the earliest such
    return int(np.min(order[1:][same]))


# ------------------------------------------------------------------ .npy/.npz
_NPZ_MAX_MEMBERS = 16


def read_npy_bytes(raw: bytes, what: str, err) -> np.ndarray:
    """Decode one ``.npy`` image without pickles and without trusting its header.

    The header's shape and dtype must describe exactly the bytes that follow
    (a header that lies about its shape is refused before anything is
    allocated); object and structured dtypes are refused.

    Parameters
    ----------
    raw : bytes
        The whole ``.npy`` image.
    what : str
        Name used in messages.
    err : callable
        ``err(message) -> Exception`` building the error to raise.
    """
    fp = io.BytesIO(raw)
    try:
        version = npformat.read_magic(fp)
        if version == (1, 0):
            shape, fortran, dtype = npformat.read_array_header_1_0(fp)
        elif version in ((2, 0), (3, 0)):
            shape, fortran, dtype = npformat.read_array_header_2_0(fp)
        else:
            raise ValueError(f"unknown .npy version {version}")
    except Exception as exc:  # numpy's header parser raises ValueError, SyntaxError,
        # tokenize.TokenError, ... on damaged headers: all mean "not a valid .npy"
        raise err(f"{what} is not a valid .npy array ({type(exc).__name__}: "
                  f"{str(exc)[:80]}).") from None
    if dtype.hasobject or dtype.names is not None or dtype.subdtype is not None \
            or dtype.kind not in "biufUS":
        raise err(f"{what} holds {dtype} data; only plain numbers (and text labels) are "
                  "accepted, never pickled objects.")
    count = 1
    for d in shape:
        count *= int(d)
    body = len(raw) - fp.tell()
    need = count * dtype.itemsize
    if need != body:
        raise err(f"{what}: the header announces shape {tuple(shape)} ({need} bytes of "
                  f"{dtype}) but the file holds {body} bytes; the file is damaged.")
    arr = np.frombuffer(raw, dtype=dtype, count=count, offset=fp.tell())
    return arr.reshape(shape, order="F" if fortran else "C")


def read_npz_members(path: Path, err, allowed: set[str] | None = None) -> dict[str, np.ndarray]:
    """Every array of an ``.npz`` archive, read strictly (see :func:`read_npy_bytes`).

    Memory is bounded by what the archive really holds: each member's size
    (from the zip directory) is checked against the memory budget before it is
    decompressed, and the decompressed bytes must match its ``.npy`` header.
    """
    check_regular_file(path, err)
    out: dict[str, np.ndarray] = {}
    try:
        with zipfile.ZipFile(path) as zf:
            infos = zf.infolist()
            if not infos:
                raise err("is an empty .npz archive (no arrays).")
            if len(infos) > _NPZ_MAX_MEMBERS and allowed is not None:
                raise err(f"holds {len(infos)} members; not a file this program wrote.")
            total = sum(int(z.file_size) for z in infos)
            require_memory(total, f"Reading {path}")
            for info in infos:
                name = info.filename
                key = name[:-4] if name.endswith(".npy") else name
                if allowed is not None and key not in allowed:
                    continue
                with zf.open(info) as fh:
                    raw = fh.read(int(info.file_size) + 1)
                if len(raw) != info.file_size:
                    raise err(f"member {name!r} is damaged (size differs from the zip "
                              "directory).")
                out[key] = read_npy_bytes(raw, f"member {name!r}", err)
    except LdpcmargError:
        raise
    except (zipfile.BadZipFile, zipfile.LargeZipFile, zlib.error, EOFError, OSError,
            NotImplementedError, ValueError, RuntimeError) as exc:
        raise err(f"not a readable .npz file ({type(exc).__name__}: {str(exc)[:80]}).") from None
    return out


def _read_npz(path: Path):
    def err(what):
        return _err(path, "", what)

    arrays = read_npz_members(path, err, allowed={"format", "shape", "data", "indices",
                                                  "indptr", "row", "col"})
    if "format" not in arrays or "shape" not in arrays:
        raise err("not a scipy.sparse .npz file (missing 'format' or 'shape'); "
                  "write it with scipy.sparse.save_npz.")
    fmt_arr = arrays["format"]
    if fmt_arr.shape != () or fmt_arr.dtype.kind not in "US":
        raise err("not a scipy.sparse .npz file (bad 'format' entry).")
    fmt = fmt_arr.item()
    fmt = fmt.decode("ascii", "replace") if isinstance(fmt, bytes) else str(fmt)
    shape_arr = arrays["shape"]
    if shape_arr.shape != (2,) or shape_arr.dtype.kind not in "iu":
        raise err(f"the 'shape' entry must be two integers; got {shape_arr.dtype} "
                  f"of shape {shape_arr.shape}.")
    m, n = (int(v) for v in shape_arr)
    if m < 0 or n < 0 or max(m, n) >= (1 << 62):
        raise err(f"invalid matrix shape ({m}, {n}).")
    if m == 0 or n == 0:
        raise err(f"empty matrix (shape ({m}, {n})).")

    def index_array(key, length=None):
        if key not in arrays:
            raise err(f"the {fmt} matrix has no {key!r} array; the file is damaged.")
        a = arrays[key]
        if a.ndim != 1 or a.dtype.kind not in "iu":
            raise err(f"the {key!r} array must be one-dimensional integers; got "
                      f"{a.dtype} of shape {a.shape} (float or other indices are refused).")
        if length is not None and a.shape[0] != length:
            raise err(f"the {key!r} array has {a.shape[0]} entries; a {fmt} matrix of shape "
                      f"({m}, {n}) needs {length}.")
        return a.astype(np.int64)

    if "data" not in arrays:
        raise err("the matrix has no 'data' array; the file is damaged.")
    data = arrays["data"]
    if data.ndim != 1 or data.dtype.kind not in "biuf":
        raise err(f"the 'data' array must be one-dimensional numbers; got {data.dtype} of "
                  f"shape {data.shape}.")
    nnz = data.shape[0]
    if fmt in ("csr", "csc"):
        major, minor = (m, n) if fmt == "csr" else (n, m)
        indptr = index_array("indptr", major + 1)
        indices = index_array("indices", nnz)
        if indptr[0] != 0 or indptr[-1] != nnz or np.any(np.diff(indptr) < 0):
            raise err(f"inconsistent {fmt.upper()} 'indptr' (must start at 0, never decrease "
                      f"and end at the {nnz} stored entries); the file is damaged.")
        if nnz and (indices.min() < 0 or indices.max() >= minor):
            j = int(np.flatnonzero((indices < 0) | (indices >= minor))[0])
            raise err(f"{fmt.upper()} index {int(indices[j])} at position {j} is out of range "
                      f"0..{minor - 1}; the file is damaged.")
        outer = np.repeat(np.arange(major, dtype=np.int64), np.diff(indptr))
        rows, cols = (outer, indices) if fmt == "csr" else (indices, outer)
    elif fmt == "coo":
        rows = index_array("row", nnz)
        cols = index_array("col", nnz)
        bad = (rows < 0) | (rows >= m) | (cols < 0) | (cols >= n)
        if np.any(bad):
            j = int(np.flatnonzero(bad)[0])
            raise err(f"COO entry ({int(rows[j])}, {int(cols[j])}) is out of range for shape "
                      f"({m}, {n}).")
    else:
        raise err(f"sparse format {fmt[:20]!r} is not supported; save the matrix as CSR, CSC "
                  "or COO.")
    bad = (data != 0) & (data != 1)
    if np.any(bad):
        j = int(np.flatnonzero(bad)[0])
        raise _err(path, f"entry ({rows[j]}, {cols[j]})",
                   f"value {float(data[j]):g} is not 0 or 1.")
    keep = data != 0
    rows, cols = rows[keep], cols[keep]
    if rows.size == 0:
        raise err("empty matrix: no entry equals 1.")
    dup = _first_duplicate(rows, cols, n)
    if dup is not None:
        raise _err(path, f"entry ({rows[dup]}, {cols[dup]})",
                   "duplicate entry (0-based row, column).")
    return rows, cols, (m, n)


def _check_size(path, rows: np.ndarray, shape: tuple[int, int]) -> None:
    """Refuse declared sizes the content cannot justify, then estimate memory."""
    m, n = shape
    nnz = int(rows.size)
    limit = ROWS_COLS_PER_ONE * nnz + EMPTY_SLACK
    if m + n > limit:
        raise _err(path, "", f"declares a {m} x {n} matrix but holds only {nnz} entries equal "
                   f"to 1; at most {ROWS_COLS_PER_ONE} rows plus columns per entry (plus "
                   f"{EMPTY_SLACK}) are accepted so that memory stays bounded by the file's "
                   "content. Check the declared size.")
    require_memory(_BYTES_PER_NODE * (m + n) + _BYTES_PER_EDGE * nnz,
                   f"The code of {path} ({m} x {n}, {nnz} ones)")


def _sniff(path: Path) -> str | None:
    try:
        with open(path, "rb") as fh:
            head = fh.read(64)
    except OSError:
        return None
    if head.startswith(b"PK"):
        return "npz"
    if head.lower().startswith(b"%%matrixmarket"):
        return "mtx"
    if head.startswith(TEXT_HEADER.encode()):
        return "txt"
    return None


def load_code(name_or_path, name: str | None = None, fmt: str | None = None) -> ParityCheckCode:
    """Load a shipped code by name, or a parity-check matrix file.

    Parameters
    ----------
    name_or_path : str or os.PathLike
        A shipped code name (see :func:`shipped_codes`, e.g. ``"tanner-155-64"``),
        or a path to a ``.mtx``, ``.txt`` or ``.npz`` file. Shipped names win.
    name : str, optional
        Name given to the code (default: the shipped name or the file stem).
    fmt : {"mtx", "txt", "npz"}, optional
        Format, overriding the extension.

    Returns
    -------
    ParityCheckCode

    Raises
    ------
    CodeFileError
        Missing or malformed file (the message names the file and line or entry).

    Examples
    --------
    >>> from ldpcmarg.code.io import load_code
    >>> code = load_code("tanner-155-64")
    >>> code.n, code.k, code.girth()
    (155, 64, 8)
    """
    if isinstance(name_or_path, ParityCheckCode):
        return name_or_path
    text = os.fspath(name_or_path)
    shipped = _shipped_files()
    if text in shipped:
        entry = shipped[text]
        with resources.as_file(entry) as real:
            code = load_code(real, name=name or text)
        code.source = f"shipped code {text}"
        return code
    path = Path(text)
    if not path.exists():
        names = ", ".join(shipped) or "(none)"
        raise CodeFileError(f"{text}: no such file, and no shipped code of that name "
                            f"(shipped codes: {names}).")
    if path.is_dir():
        raise CodeFileError(f"{text}: is a directory, not a parity-check matrix file.")
    check_regular_file(path)
    if fmt is None:
        fmt = FORMATS.get(path.suffix.lower()) or _sniff(path)
    if fmt not in ("mtx", "txt", "npz"):
        raise CodeFileError(f"{text}: unknown file format; use .mtx (Matrix Market), "
                            f".txt ({TEXT_HEADER} format) or .npz (scipy.sparse).")
    if fmt == "txt":
        rows, cols, shape = read_checks_text(path)
    elif fmt == "mtx":
        rows, cols, shape = _read_mtx(path)
    else:
        rows, cols, shape = _read_npz(path)
    _check_size(path, rows, shape)
    H = sp.csr_matrix((np.ones(rows.size, dtype=np.uint8), (rows, cols)), shape=shape,
                      dtype=np.uint8)
    try:
        return ParityCheckCode(H, name=name or path.stem, source=str(path))
    except InputError as exc:  # pragma: no cover - readers validate first
        raise CodeFileError(f"{text}: {exc}") from None


# ---------------------------------------------------------------- writing
def write_checks_text(code: ParityCheckCode, path, comment: str = "") -> None:
    """Write ``code`` in the ldpcmarg check-list format (see the module docstring)."""
    lines = [f"{TEXT_HEADER} n={code.n} m={code.m}"]
    for c in (comment or "").splitlines():
        lines.append(f"# {c}")
    ptr, idx = code.check_ptr, code.edge_var
    for c in range(code.m):
        bits = idx[ptr[c]:ptr[c + 1]]
        lines.append(" ".join(str(int(b)) for b in bits) if bits.size else "-")
    Path(path).write_text("\n".join(lines) + "\n", encoding="utf-8")


def save_code(code: ParityCheckCode, path, fmt: str | None = None) -> Path:
    """Write a code's parity-check matrix.

    Parameters
    ----------
    code : ParityCheckCode
    path : str or os.PathLike
    fmt : {"mtx", "txt", "npz"}, optional
        Default: from the extension.

    Returns
    -------
    pathlib.Path
        The path written.
    """
    path = Path(path)
    if fmt is None:
        fmt = FORMATS.get(path.suffix.lower())
    if fmt not in ("mtx", "txt", "npz"):
        raise InputError(f"Cannot tell the format of {path}; use a .mtx, .txt or .npz "
                         "extension or pass fmt.")
    comment = f"name: {code.name}" + (f"\nsource: {code.source}" if code.source else "")
    try:
        if fmt == "txt":
            write_checks_text(code, path, comment)
        elif fmt == "mtx":
            coo = sp.coo_matrix(code.H)
            pattern = sp.coo_matrix((np.ones(coo.nnz), (coo.row, coo.col)), shape=coo.shape)
            scipy.io.mmwrite(str(path), pattern, comment=" " + comment.replace("\n", "\n "),
                             field="pattern", symmetry="general")
            if path.suffix.lower() != ".mtx" and Path(str(path) + ".mtx").exists():
                Path(str(path) + ".mtx").replace(path)
        else:
            with open(path, "wb") as fh:
                sp.save_npz(fh, sp.csr_matrix(code.H), compressed=True)
    except OSError as exc:
        raise InputError(f"Cannot write {path}: {exc.strerror or exc}.") from None
    return path
