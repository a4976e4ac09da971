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

``.npz`` -- :func:`scipy.sparse.save_npz` files, loaded with pickling disabled.

Every malformed input raises :class:`~ldpcmarg.errors.CodeFileError` with one
message naming the file and the line or entry: missing file, unparsable line,
value other than 0/1, duplicate entry, index out of range, empty matrix, wrong
header.

Shipped codes live in the package folder ``ldpcmarg/codes`` (``<name>.txt``
or ``<name>.mtx`` plus a card ``<name>.md``); :func:`load_code` resolves their
names before paths, also from a non-editable install.
"""

from __future__ import annotations

import os
import re
import zipfile
from importlib import resources
from pathlib import Path

import numpy as np
import scipy.io
import scipy.sparse as sp

from ..errors import CodeFileError, InputError
from .parity_check import ParityCheckCode

__all__ = ["load_code", "save_code", "shipped_codes", "shipped_code_dir", "FORMATS",
           "read_checks_text", "write_checks_text"]

#: Extension -> format name.
FORMATS = {".mtx": "mtx", ".txt": "txt", ".npz": "npz"}

TEXT_HEADER = "ldpcmarg-checks"
_HEADER_RE = re.compile(rf"^{TEXT_HEADER}\s+n=(\d+)\s+m=(\d+)\s*$")


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
def _err(path, where: str, what: str) -> CodeFileError:
    loc = f"{path}, {where}" if where else f"{path}"
    return CodeFileError(f"{loc}: {what}")


def _read_text(path: Path) -> str:
    try:
        return path.read_text(encoding="utf-8")
    except UnicodeDecodeError as exc:
        raise _err(path, "", f"not a text file ({exc.reason} at byte {exc.start}).") from None


def read_checks_text(path) -> tuple[np.ndarray, np.ndarray, tuple[int, int]]:
    """Parse the ldpcmarg check-list format.

    Returns
    -------
    rows, cols : ndarray of int64
        Coordinates of the ones.
    shape : (m, n)
    """
    path = Path(path)
    lines = _read_text(path).splitlines()
    if not lines:
        raise _err(path, "line 1", f"empty file; expected the header '{TEXT_HEADER} n=<n> m=<m>'.")
    head = lines[0].strip()
    mt = _HEADER_RE.match(head)
    if not mt:
        raise _err(path, "line 1",
                   f"wrong header {head[:60]!r}; expected '{TEXT_HEADER} n=<bits> m=<checks>'.")
    n, m = int(mt.group(1)), int(mt.group(2))
    if n == 0 or m == 0:
        raise _err(path, "line 1", f"empty matrix (n={n}, m={m}).")
    rows: list[int] = []
    cols: list[int] = []
    check = 0
    for lineno, raw in enumerate(lines[1:], start=2):
        s = raw.strip()
        if not s or s.startswith("#"):
            continue
        if check >= m:
            raise _err(path, f"line {lineno}", f"more check lines than m = {m} in the header.")
        if s == "-":
            check += 1
            continue
        seen = set()
        for tok in s.split():
            try:
                b = int(tok)
            except ValueError:
                raise _err(path, f"line {lineno}",
                           f"unparsable bit index {tok!r} in check {check} "
                           "(expected 0-based integers, or '-' for an empty check).") from None
            if b < 0 or b >= n:
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
    return np.array(rows, dtype=np.int64), np.array(cols, dtype=np.int64), (m, n)


def _validate_mtx(path: Path) -> None:
    """Check a Matrix Market file line by line so errors can name the line."""
    lines = _read_text(path).splitlines()
    if not lines or not lines[0].lower().startswith("%%matrixmarket"):
        raise _err(path, "line 1", "wrong header; expected '%%MatrixMarket matrix coordinate "
                   "pattern general' (or integer/real instead of pattern).")
    parts = lines[0].split()
    if len(parts) != 5 or parts[1].lower() != "matrix":
        raise _err(path, "line 1", f"wrong header {lines[0][:70]!r}.")
    fmt, field, symm = (p.lower() for p in parts[2:])
    if fmt not in ("coordinate", "array"):
        raise _err(path, "line 1", f"unknown format {fmt!r} (expected coordinate or array).")
    if field not in ("pattern", "integer", "real"):
        raise _err(path, "line 1", f"field {field!r} is not allowed; use pattern, integer or real.")
    if symm != "general":
        raise _err(path, "line 1", f"symmetry {symm!r} is not allowed; use general.")
    if fmt == "array" and field == "pattern":
        raise _err(path, "line 1", "the array format cannot have field 'pattern'.")
    i = 1
    while i < len(lines) and (not lines[i].strip() or lines[i].lstrip().startswith("%")):
        i += 1
    if i == len(lines):
        raise _err(path, "", "missing the size line.")
    size = lines[i].split()
    want = 3 if fmt == "coordinate" else 2
    try:
        dims = [int(t) for t in size]
        if len(dims) != want or min(dims) < 0:
            raise ValueError
    except ValueError:
        raise _err(path, f"line {i + 1}", f"unparsable size line {lines[i].strip()[:60]!r} "
                   f"(expected {want} non-negative integers).") from None
    nrows, ncols = dims[0], dims[1]
    if nrows == 0 or ncols == 0:
        raise _err(path, f"line {i + 1}", f"empty matrix ({nrows} x {ncols}).")
    expected = dims[2] if fmt == "coordinate" else nrows * ncols
    seen: set[tuple[int, int]] = set()
    count = 0
    nonzero = 0
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
            r, c = (count - 1) % nrows, (count - 1) // nrows
            where = f"line {lineno} (entry {r + 1}, {c + 1})"
        else:
            ntok = 2 if field == "pattern" else 3
            if len(toks) != ntok:
                raise _err(path, f"line {lineno}", f"unparsable entry {s[:60]!r} "
                           f"(expected {ntok} numbers for field {field}).")
            try:
                r, c = int(toks[0]), int(toks[1])
            except ValueError:
                raise _err(path, f"line {lineno}", f"unparsable entry {s[:60]!r}.") from None
            if not (1 <= r <= nrows and 1 <= c <= ncols):
                raise _err(path, f"line {lineno}", f"index ({r}, {c}) out of range "
                           f"1..{nrows} x 1..{ncols} (Matrix Market indices are 1-based).")
            if (r, c) in seen:
                raise _err(path, f"line {lineno}", f"duplicate entry ({r}, {c}).")
            seen.add((r, c))
            vtok = toks[2] if field != "pattern" else "1"
            where = f"line {lineno}"
        try:
            v = float(vtok) if field == "real" else int(vtok)
        except ValueError:
            raise _err(path, where, f"unparsable value {vtok!r}.") from None
        if v not in (0, 1):
            raise _err(path, where, f"value {vtok} is not 0 or 1.")
        nonzero += v == 1
    if count < expected:
        raise _err(path, "", f"found {count} entries, but the size line announces {expected}.")
    if nonzero == 0:
        raise _err(path, "", "empty matrix: no entry equals 1.")


def _read_mtx(path: Path):
    _validate_mtx(path)
    try:
        M = scipy.io.mmread(str(path))
    except (ValueError, OSError) as exc:  # pragma: no cover - pre-validation catches these
        raise _err(path, "", f"unreadable Matrix Market file ({exc}).") from None
    if sp.issparse(M):
        coo = sp.coo_matrix(M)
        keep = coo.data != 0
        return coo.row[keep].astype(np.int64), coo.col[keep].astype(np.int64), coo.shape
    arr = np.asarray(M)
    r, c = np.nonzero(arr)
    return r.astype(np.int64), c.astype(np.int64), arr.shape


def _read_npz(path: Path):
    try:
        with np.load(path, allow_pickle=False) as f:
            keys = set(f.files)
    except (zipfile.BadZipFile, OSError, ValueError) as exc:
        raise _err(path, "", f"not a readable .npz file ({exc}).") from None
    if "format" not in keys or "shape" not in keys:
        raise _err(path, "", "not a scipy.sparse .npz file (missing 'format' or 'shape'); "
                   "write it with scipy.sparse.save_npz.")
    try:
        M = sp.load_npz(path)
    except (ValueError, KeyError, OSError, TypeError) as exc:
        raise _err(path, "", f"malformed scipy.sparse .npz file ({exc}).") from None
    coo = sp.coo_matrix(M)
    if coo.shape[0] == 0 or coo.shape[1] == 0:
        raise _err(path, "", f"empty matrix (shape {coo.shape}).")
    data = np.asarray(coo.data)
    bad = (data != 0) & (data != 1)
    if np.any(bad):
        j = int(np.flatnonzero(bad)[0])
        raise _err(path, f"entry ({coo.row[j]}, {coo.col[j]})",
                   f"value {float(data[j]):g} is not 0 or 1.")
    keep = data != 0
    rows, cols = coo.row[keep].astype(np.int64), coo.col[keep].astype(np.int64)
    if rows.size == 0:
        raise _err(path, "", "empty matrix: no entry equals 1.")
    key = rows * coo.shape[1] + cols
    uniq, counts = np.unique(key, return_counts=True)
    if np.any(counts > 1):
        dup = int(uniq[np.argmax(counts > 1)])
        raise _err(path, f"entry ({dup // coo.shape[1]}, {dup % coo.shape[1]})",
                   "duplicate entry (0-based row, column).")
    return rows, cols, coo.shape


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
