"""Per-bit posteriors (soft outputs) for given channel outputs or LLRs.

Read frames from ``.npy``, ``.npz`` or text/CSV, turn channel outputs into
channel LLRs (BPSK-AWGN, BSC, BEC), decode with any registered decoder that
has a soft output, and write ``P(x=1|y)`` and posterior LLRs with per-frame
iterations, validity and the decoder's certificates.

Conventions
-----------
* ``p1 = P(x_i = 1 | y)``; ``llr = ln P(x_i=0|y) - ln P(x_i=1|y)`` (positive
  favours 0). ``p1`` is computed from the LLR as ``1 / (1 + e^llr)`` without
  loss of the small probabilities.
* AWGN outputs are BPSK samples ``y = (1 - 2x) + noise`` with unit symbol
  energy; BSC outputs are bits 0/1; BEC outputs are 0, 1 or 2 (= erased).

Received symbols of a link (``link=``, ``--modulation`` etc.)
-------------------------------------------------------------
With a :class:`~ldpcmarg.link.link.Link` the input holds what the receiver
saw, in a format of this project:

* ``.npz`` with the array ``y`` -- received symbols ``y = h s + w``, complex,
  shape ``(F, S)`` or ``(S,)`` with ``S = ceil((n - p - s) / m)`` symbols per
  frame (``p`` punctured, ``s`` shortened bits, ``m`` bits per symbol; the
  last symbol of a frame is padded with zero bits) -- and, optionally, ``h``:
  the channel gains of the same shape (perfect channel knowledge), required
  when the link has fading;
* ``.npy``: the symbols alone (no fading);
* text/CSV or real arrays: only for real constellations (BPSK, a user PAM).

Symbol ``t`` of a frame carries the bits ``t*m ... t*m + m - 1`` of the sent
stream (first bit = most significant label bit); the sent stream is the code
bits without the punctured and shortened ones, in code order, permuted by
the interleaver when one is set (``stream[j] = sent[perm[j]]``). The noise
level comes from Eb/N0 (``Es/N0 = R_t * m * Eb/N0`` with the transmitted rate
``R_t``), Es/N0, or ``sigma`` (noise standard deviation per real dimension,
``N0 = 2 sigma^2``), with Es = 1. The receiver demaps (exact or max-log),
de-interleaves, re-inserts punctured (LLR 0) and shortened (``+LLR_MAX``)
bits and quantises when the link has a quantiser; received data are not
descrambled (the simulator's scrambler is a simulation device). The link
settings go into ``meta["channel"]`` (the fields of ``simulate --json``) and
``meta["link"]`` (the link's identity).

Output formats (chosen from the output file's extension)
--------------------------------------------------------
``.npz``
    One file with arrays ``p1``, ``llr`` (posterior LLRs), ``bits`` (hard
    decisions) — each (F, n) —, ``iterations`` (F,), ``valid`` (F,), one
    array ``info.<name>`` per certificate (first dimension F) and ``meta``
    (a JSON string: code, decoder, channel, conventions).
``.npy``
    ``OUT.npy`` holds ``p1`` (F, n); ``OUT.llr.npy`` the posterior LLRs and
    ``OUT.bits.npy`` the hard decisions; the sidecar ``OUT.npy.json`` holds
    ``meta``, ``iterations``, ``valid`` and ``info``.
``.csv``
    Long format, one row per bit: ``frame,bit,p1,llr,hard_decision`` with
    17 significant digits (floats read back bit-identically); the sidecar
    ``OUT.csv.json`` holds the per-frame data as for ``.npy``.

Existing output files are never overwritten unless ``force=True``
(``--force`` on the command line): the check covers every file of the
bundle before anything is written.
"""

from __future__ import annotations

import json
import math
import re
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

import numpy as np
from scipy.special import expit

from .._memory import require_memory
from ..code.io import check_regular_file, read_npy_bytes, read_npz_members
from ..decoders.base import Decoder, check_llr, make_decoder
from ..errors import InputError
from ..link.channels import ERASED, AWGNChannel, BECChannel, BSCChannel, Channel, make_channel

__all__ = [
    "PosteriorResult",
    "compute_posteriors",
    "read_frames",
    "read_received",
    "link_noise",
    "outputs_to_llr",
    "parse_channel_spec",
    "write_posteriors",
    "read_posteriors",
    "output_paths",
    "INPUT_FORMATS",
    "OUTPUT_FORMATS",
    "DEFAULT_DECODER",
]

#: Accepted input extensions (text formats: comma-, semicolon-, tab- or space-separated).
INPUT_FORMATS = (".npy", ".npz", ".csv", ".txt", ".tsv", ".dat")
#: Accepted output formats.
OUTPUT_FORMATS = ("npz", "npy", "csv")

_FORMAT_TAG = "ldpcmarg-posteriors"
_FORMAT_VERSION = 1


@dataclass
class PosteriorResult:
    """Soft outputs of one decoder for F frames.

    Attributes
    ----------
    p1 : ndarray of shape (F, n), float64
        ``P(x_i = 1 | y)``.
    llr : ndarray of shape (F, n), float64
        Posterior LLRs ``ln P(x_i=0|y) - ln P(x_i=1|y)``.
    bits : ndarray of shape (F, n), uint8
        The decoder's hard decisions (for LP-type decoders these need not be
        the signs of ``llr``).
    iterations : ndarray of shape (F,), int64
    valid : ndarray of shape (F,), bool
        Hard decision satisfies every parity check.
    info : dict of str to ndarray
        Per-frame certificates and extras from the decoder (``duality_gap``,
        ``log_partition_bound``, ``ml_certificate``, ``certified_gap``,
        ``status`` …), each an array with first dimension F (numeric, bool or
        str; non-array extras such as traces are not kept).
    meta : dict
        JSON-ready description: code summary, decoder spec, channel, input kind.
    """

    p1: np.ndarray
    llr: np.ndarray
    bits: np.ndarray
    iterations: np.ndarray
    valid: np.ndarray
    info: dict[str, np.ndarray] = field(default_factory=dict)
    meta: dict[str, Any] = field(default_factory=dict)

    @property
    def num_frames(self) -> int:
        return int(self.p1.shape[0])

    def summary(self) -> dict:
        """Per-run summary for printing: frames, valid frames, iterations, certificate ranges."""
        out = {
            "frames": self.num_frames,
            "n": int(self.p1.shape[1]),
            "valid_frames": int(np.sum(self.valid)),
            "mean_iterations": float(np.mean(self.iterations)) if self.num_frames else math.nan,
            "max_iterations": int(np.max(self.iterations)) if self.num_frames else 0,
        }
        for k, v in self.info.items():
            a = np.asarray(v)
            if a.ndim == 1 and a.dtype.kind in "fiub" and a.size:
                af = a.astype(np.float64)
                fin = af[np.isfinite(af)]
                out[k] = {"min": float(fin.min()) if fin.size else None,
                          "max": float(fin.max()) if fin.size else None,
                          "mean": float(fin.mean()) if fin.size else None}
        return out


# --------------------------------------------------------------------- input
def _text_delimiter(first_line: str) -> str | None:
    for d in (",", ";", "\t"):
        if d in first_line:
            return d
    return None  # any whitespace


#: A number in a text input: ASCII decimal or scientific notation, or inf/nan
#: (refused later with a clear message). ``float()`` alone would also take
#: ``1_0`` (= 10) and non-ASCII digits.
_NUMBER_RE = re.compile(
    r"[+-]?(([0-9]+\.?[0-9]*|\.[0-9]+)([eE][+-]?[0-9]+)?|inf|infinity|nan)",
    re.ASCII | re.IGNORECASE)

#: Bytes of memory per byte of a text input while it is parsed (Python floats
#: in lists, then the float64 array).
_TEXT_BYTES_PER_BYTE = 24


def _input_error(path):
    return lambda what: InputError(f"{path}: {what}")


def _read_text(path: Path) -> np.ndarray:
    size = check_regular_file(path, _input_error(path))
    require_memory(_TEXT_BYTES_PER_BYTE * size, f"Parsing the text file {path}")
    try:
        lines = path.read_bytes().decode("utf-8").split("\n")
    except UnicodeDecodeError as exc:
        raise InputError(f"{path} is not a text file ({exc.reason}).") from exc
    except OSError as exc:
        raise InputError(f"{path}: cannot read the file ({exc.strerror}).") from None
    lines = [ln[:-1] if ln.endswith("\r") else ln for ln in lines]
    data_lines = [(i, ln) for i, ln in enumerate(lines, 1)
                  if ln.strip() and not ln.lstrip().startswith("#")]
    if not data_lines:
        raise InputError(f"{path} holds no data rows.")
    delim = _text_delimiter(data_lines[0][1])

    def split(ln):
        return [t.strip() for t in (ln.split(delim) if delim else ln.split())]

    # One header row of labels (no token a number) is allowed.
    first = split(data_lines[0][1])
    if not any(_is_float(t) for t in first):
        data_lines = data_lines[1:]
        if not data_lines:
            raise InputError(f"{path} holds a header but no data rows.") from None
    rows = []
    width = None
    for lineno, ln in data_lines:
        toks = split(ln)
        if delim and toks and toks[-1] == "":
            toks = toks[:-1]  # trailing delimiter
        bad = next((t for t in toks if not _is_float(t)), None)
        if bad is not None:
            raise InputError(f"{path}, line {lineno}: {bad[:40]!r} is not a number.")
        vals = [float(t) for t in toks]
        if width is None:
            width = len(vals)
        elif len(vals) != width:
            raise InputError(
                f"{path}, line {lineno}: {len(vals)} values where earlier rows have {width}."
            )
        rows.append(vals)
    return np.asarray(rows, dtype=np.float64)


def _is_float(t: str) -> bool:
    return len(t) <= 400 and _NUMBER_RE.fullmatch(t) is not None


def read_frames(path, *, key: str | None = None, n: int | None = None,
                prefer: tuple[str, ...] = ("llr", "outputs", "y")) -> np.ndarray:
    """Read one or many frames from ``.npy``, ``.npz`` or a text/CSV file.

    Parameters
    ----------
    path : str or Path
    key : str, optional
        Array name inside an ``.npz`` holding several arrays.
    n : int, optional
        Code length; when given the result is checked and shaped to (F, n).
        A text file with a single column of ``n`` values is read as one frame.
    prefer : tuple of str
        ``.npz`` keys tried, in order, when ``key`` is not given and the file
        holds several arrays.

    Returns
    -------
    ndarray of shape (F, n) (with ``n``) or as stored (without)
        Numeric values as stored (floats, or integers/bools from binary files).

    Raises
    ------
    InputError
        Unknown extension, unreadable file, non-numeric values, ragged rows,
        missing ``.npz`` key, or a shape other than (F, n) / (n,).
    """
    p = Path(path)
    if not p.exists():
        raise InputError(f"Input file {p} does not exist.")
    if p.is_dir():
        raise InputError(f"Input {p} is a directory, not a file.")
    size = check_regular_file(p, _input_error(p))
    ext = p.suffix.lower()
    if ext not in INPUT_FORMATS:
        raise InputError(
            f"Unknown input format {ext or '(no extension)'!r} for {p}; accepted: "
            + ", ".join(INPUT_FORMATS) + "."
        )
    text = ext not in (".npy", ".npz")
    if ext == ".npy":
        # read strictly: the header must match the bytes (a lying shape is refused
        # before any allocation), no pickles, an empty file is an error
        require_memory(2 * size, f"Reading {p}")
        try:
            raw = p.read_bytes()
        except OSError as exc:
            raise InputError(f"{p}: cannot read the file ({exc.strerror}).") from None
        if not raw:
            raise InputError(f"{p} is empty; expected a .npy array of channel outputs or LLRs.")
        arr = read_npy_bytes(raw, f"{p}", lambda what: InputError(what))
    elif ext == ".npz":
        z = read_npz_members(p, _input_error(p))
        names = list(z)
        if key is not None:
            if key not in names:
                raise InputError(f"{p} has no array {key!r}; it holds: {', '.join(names)}.")
            chosen = key
        elif len(names) == 1:
            chosen = names[0]
        else:
            chosen = next((k for k in prefer if k in names), None)
            if chosen is None:
                raise InputError(
                    f"{p} holds several arrays ({', '.join(names)}); name one with --key."
                )
        arr = z[chosen]
    else:
        arr = _read_text(p)
    if arr.dtype.kind not in "biuf":
        raise InputError(f"{p} holds {arr.dtype} data; numbers are needed.")
    if not arr.flags.writeable:
        arr = arr.copy()
    if n is None:
        return arr
    return _frames_2d(arr, n, str(p), allow_column=text)


def _frames_2d(arr: np.ndarray, n: int, what: str, *, allow_column: bool = False) -> np.ndarray:
    """Shape ``arr`` to (F, n) or raise an InputError naming the shapes."""
    if arr.ndim == 1:
        arr = arr[None, :]
    elif arr.ndim == 2 and allow_column and arr.shape == (n, 1):
        arr = arr.T
    if arr.ndim != 2 or arr.shape[1] != n:
        hint = ""
        if arr.ndim == 2 and arr.shape[0] == n:
            hint = " (the array looks transposed: frames must be rows)"
        raise InputError(
            f"{what}: expected shape (F, n) or (n,) with code length n = {n}; got shape "
            f"{tuple(arr.shape)}{hint}."
        )
    if arr.shape[0] == 0:
        raise InputError(f"{what}: no frames (shape {tuple(arr.shape)}).")
    return arr


def _first_where(mask: np.ndarray) -> tuple[int, int]:
    f, i = (int(v) for v in np.argwhere(mask)[0])
    return f, i


def read_received(path, *, key: str | None = None) -> tuple[np.ndarray, np.ndarray | None]:
    """Read received symbols and optional channel gains (format in the module notes).

    Parameters
    ----------
    path : str or Path
        ``.npz`` (``y`` and optional ``h``), ``.npy`` (symbols only) or a text
        file (real values only).
    key : str, optional
        Name of the symbols array in an ``.npz`` (default ``y``, or its only array).

    Returns
    -------
    (symbols, gains) : ndarray and ndarray or None
        As stored; shapes are checked against the link by
        :meth:`~ldpcmarg.link.link.Link.check_received`.
    """
    p = Path(path)
    if not p.exists():
        raise InputError(f"Input file {p} does not exist.")
    if p.is_dir():
        raise InputError(f"Input {p} is a directory, not a file.")
    ext = p.suffix.lower()
    if ext not in INPUT_FORMATS:
        raise InputError(f"Unknown input format {ext or '(no extension)'!r} for {p}; accepted: "
                         + ", ".join(INPUT_FORMATS) + ".")
    if ext == ".npy":
        try:
            return np.load(p, allow_pickle=False), None
        except ValueError as exc:
            raise InputError(f"{p} is not a plain numeric .npy array ({exc}).") from exc
    if ext != ".npz":
        return _read_text(p), None
    try:
        z = np.load(p, allow_pickle=False)
    except (ValueError, OSError) as exc:
        raise InputError(f"{p} is not a readable .npz archive ({exc}).") from exc
    with z:
        names = list(z.files)
        if key is not None:
            if key not in names:
                raise InputError(f"{p} has no array {key!r}; it holds: {', '.join(names)}.")
            chosen = key
        elif "y" in names:
            chosen = "y"
        elif len(names) == 1:
            chosen = names[0]
        else:
            raise InputError(f"{p} holds {', '.join(names)} but no array 'y' of received "
                             "symbols; name the symbols with --key.")
        try:
            y = z[chosen]
            h = z["h"] if "h" in names and chosen != "h" else None
        except ValueError as exc:
            raise InputError(f"An array in {p} is not plain numeric ({exc}).") from exc
    return y, h


def link_noise(channel, link) -> dict:
    """Es/N0 of received link data from a noise spec.

    Parameters
    ----------
    channel : str, dict or AWGNChannel
        ``"awgn:ebn0=<dB>"`` (Eb/N0 with the link's transmitted rate and bits
        per symbol), ``"awgn:esn0=<dB>"`` or ``"awgn:sigma=<std per real
        dimension>"``; a dict ``{"ebn0": x}`` etc.; or an AWGNChannel (its sigma).
    link : Link

    Returns
    -------
    dict
        ``esn0`` (linear), ``esn0_db``, ``ebn0_db``, ``sigma`` (``sqrt(N0/2)``)
        and ``given`` (which quantity was given).
    """
    if isinstance(channel, AWGNChannel):
        given, value = "sigma", float(channel.sigma)
    elif isinstance(channel, dict):
        items = [(str(k).lower(), v) for k, v in channel.items() if v is not None]
        if len(items) != 1 or items[0][0] not in ("ebn0", "esn0", "sigma"):
            raise InputError("The noise level of link data is one of ebn0 (dB), esn0 (dB) or "
                             f"sigma; got {channel!r}.")
        given, value = items[0][0], float(items[0][1])
    elif isinstance(channel, str):
        kind, _, rest = channel.strip().partition(":")
        k, eq, v = rest.strip().partition("=")
        k = k.strip().lower()
        if kind.strip().lower() != "awgn" or not eq or k not in ("ebn0", "esn0", "sigma") \
                or "," in v:
            raise InputError(
                f"Link data need the AWGN noise level as awgn:ebn0=<dB>, awgn:esn0=<dB> or "
                f"awgn:sigma=<std> (--ebn0, --esn0 or --sigma); got {channel!r}.")
        try:
            given, value = k, float(v)
        except ValueError:
            raise InputError(f"The noise level {k} must be a number; got {v.strip()!r}.") \
                from None
    else:
        raise InputError("Link data need the noise level (--ebn0, --esn0 or --sigma); the BSC "
                         "and BEC do not apply to a modulated link.")
    if not math.isfinite(value) or (given == "sigma" and value <= 0):
        raise InputError(f"The noise level {given} must be a finite number"
                         + (" > 0" if given == "sigma" else "") + f"; got {value!r}.")
    if given == "ebn0":
        esn0 = link.esn0_linear(value)
    elif given == "esn0":
        esn0 = 10.0 ** (value / 10.0)
    else:
        esn0 = 1.0 / (2.0 * value**2)
    esn0_db = 10.0 * math.log10(esn0)
    return {"given": given, "esn0": esn0, "esn0_db": esn0_db,
            "ebn0_db": value if given == "ebn0" else link.ebn0_db(esn0_db),
            "sigma": math.sqrt(1.0 / (2.0 * esn0))}


def _link_of(link, code):
    from ..link.link import Link

    if isinstance(link, Link):
        if link.n != code.n:
            raise InputError(f"The link was built for n = {link.n}, the code has n = {code.n}.")
        return link
    if isinstance(link, dict):
        return Link.build(code, **link)
    raise InputError("link= takes a Link (ldpcmarg.link.link.Link.build) or a dict of its "
                     f"settings (modulation=..., fading=..., ...); got {type(link).__name__}.")


def parse_channel_spec(spec: str, *, rate: float | None = None) -> Channel:
    """Build a channel from a spec string.

    Parameters
    ----------
    spec : str
        ``"awgn:ebn0=2.5"`` (Eb/N0 in dB, needs ``rate``), ``"awgn:esn0=1"``
        (Es/N0 in dB), ``"awgn:sigma=0.8"``, ``"bsc:p=0.05"``,
        ``"bec:epsilon=0.3"``.
    rate : float, optional
        Code rate k/n (for Eb/N0).

    Returns
    -------
    Channel
    """
    if not isinstance(spec, str) or not spec.strip():
        raise InputError(f"A channel spec must be a non-empty string; got {spec!r}.")
    kind, _, rest = spec.strip().partition(":")
    kind = kind.strip().lower()
    accepted = {"awgn": ("ebn0", "esn0", "sigma"), "bsc": ("p",), "bec": ("epsilon",)}
    if kind not in accepted:
        raise InputError(f"Unknown channel {kind!r} in {spec!r}; accepted: awgn, bsc, bec.")
    opts: dict[str, float] = {}
    for item in filter(None, (s.strip() for s in rest.split(","))):
        k, eq, v = item.partition("=")
        k = k.strip().lower()
        if not eq or k not in accepted[kind]:
            raise InputError(
                f"Bad channel option {item!r} in {spec!r}; {kind} takes "
                + " or ".join(f"{a}=<number>" for a in accepted[kind]) + "."
            )
        try:
            opts[k] = float(v)
        except ValueError:
            raise InputError(f"Channel option {k} must be a number; got {v.strip()!r}.") from None
    if kind == "awgn":
        return make_channel("awgn", ebn0_db=opts.get("ebn0"), esn0_db=opts.get("esn0"),
                            sigma=opts.get("sigma"), rate=rate)
    if kind == "bsc":
        return make_channel("bsc", p=opts.get("p"))
    return make_channel("bec", epsilon=opts.get("epsilon"))


def outputs_to_llr(outputs, channel: Channel, n: int) -> np.ndarray:
    """Channel LLRs for channel outputs, after checking that they fit the channel.

    Parameters
    ----------
    outputs : array_like of shape (F, n) or (n,)
        AWGN: real BPSK samples; BSC: 0/1; BEC: 0, 1 or 2 (= erased).
    channel : Channel
    n : int
        Code length.

    Returns
    -------
    ndarray of shape (F, n), float64

    Raises
    ------
    InputError
        Shape mismatch, NaN/inf, or values that the channel cannot emit
        (the message names the first offending frame and bit and suggests
        the channel that fits).
    """
    y = _frames_2d(np.asarray(outputs), n, "Channel outputs")
    if y.dtype.kind not in "biuf":
        raise InputError(f"Channel outputs must be numeric; got dtype {y.dtype}.")
    yf = y.astype(np.float64)
    if np.isnan(yf).any():
        f, i = _first_where(np.isnan(yf))
        raise InputError(f"Channel outputs contain NaN (frame {f}, bit {i}).")
    if np.isinf(yf).any():
        f, i = _first_where(np.isinf(yf))
        raise InputError(f"Channel outputs contain an infinite value (frame {f}, bit {i}).")
    binary = (yf == 0.0) | (yf == 1.0)
    if isinstance(channel, AWGNChannel):
        if np.all(binary):
            raise InputError(
                "The channel outputs are all 0 or 1, which looks like hard bits, not BPSK "
                "samples (+-1 plus noise); give a BSC (--bsc P) instead of an AWGN channel."
            )
        if np.all(binary | (yf == float(ERASED))):
            raise InputError(
                "The channel outputs are all 0, 1 or 2, which looks like BEC outputs, not BPSK "
                "samples; give a BEC (--bec EPSILON) instead of an AWGN channel."
            )
    elif isinstance(channel, BSCChannel):
        if not np.all(binary):
            f, i = _first_where(~binary)
            raise InputError(
                f"BSC outputs must be 0 or 1; frame {f}, bit {i} is {float(yf[f, i])!r}"
                + (" (real-valued outputs need an AWGN channel: --ebn0, --esn0 or --sigma)."
                   if not float(yf[f, i]).is_integer() else ".")
            )
    elif isinstance(channel, BECChannel):
        ok = binary | (yf == float(ERASED))
        if not np.all(ok):
            f, i = _first_where(~ok)
            raise InputError(
                f"BEC outputs must be 0, 1 or {ERASED} (erased); frame {f}, bit {i} "
                f"is {float(yf[f, i])!r}."
            )
        yf = yf.astype(np.uint8)
    with np.errstate(over="ignore"):
        llr = np.ascontiguousarray(channel.llr(yf), dtype=np.float64)
    if isinstance(channel, AWGNChannel) and not np.all(np.isfinite(llr)):
        # 2 y / sigma^2 overflowed: the outputs themselves are the problem, not the LLRs
        f, i = _first_where(~np.isfinite(llr))
        raise InputError(
            f"Channel outputs out of range: frame {f}, bit {i} is {float(yf[f, i]):.3g}, so "
            f"its LLR 2y/sigma^2 (sigma = {channel.sigma:.4g}) overflows; BPSK samples are "
            "about +-1 plus noise: scale the outputs, or pass LLRs (no channel option)."
        )
    return llr


def _resolve_decoder(decoder, code) -> Decoder:
    if isinstance(decoder, Decoder):
        if decoder.code.n != code.n:
            raise InputError(
                f"The decoder was built for length {decoder.code.n}, the code has n = {code.n}."
            )
        return decoder
    return make_decoder(decoder, code)


#: Default decoder for soft outputs: sum-product run to its iteration limit.
#: Stopping at the first valid hard decision (the decoders' default) leaves the
#: soft outputs unconverged: on cycle-free codes they then differ visibly from
#: the exact posteriors (0.49 in P(x=1) on one random tree code; the test
#: suite checks the difference), while the full run matches them.
DEFAULT_DECODER = "sum-product:early_stop=false"


def compute_posteriors(code, decoder=DEFAULT_DECODER, *, llr=None, outputs=None,
                       channel: Channel | str | None = None, link=None,
                       gains=None) -> PosteriorResult:
    """Decode frames and return per-bit posteriors with certificates.

    Give either channel LLRs (``llr``) or channel outputs (``outputs``) with
    the ``channel`` that produced them.

    Parameters
    ----------
    code : ParityCheckCode
    decoder : str or Decoder
        Spec ``"name:opt=value,..."`` or a built decoder; it must have a soft
        output (``hard-decision`` passes the channel LLRs through). Default
        :data:`DEFAULT_DECODER` (sum-product without early stopping).
    llr : array_like of shape (F, n) or (n,), float, optional
        Channel LLRs ``ln P(y|x=0) - ln P(y|x=1)``.
    outputs : array_like of shape (F, n) or (n,), optional
        Channel outputs (see :func:`outputs_to_llr`).
    channel : Channel or str, optional
        Needed with ``outputs``; a spec string as in :func:`parse_channel_spec`
        (Eb/N0 uses the code's rate k/n). With ``link``: the noise level as in
        :func:`link_noise` (Eb/N0 uses the transmitted rate and bits per symbol).
    link : Link or dict, optional
        Modulation, fading, rate matching, interleaver and quantiser of the
        received data (a :class:`~ldpcmarg.link.link.Link` or a dict of
        :meth:`~ldpcmarg.link.link.Link.build` keywords, e.g.
        ``{"modulation": "qam16", "puncture": 20}``). ``outputs`` then holds
        the received symbols (F, S), see the module notes.
    gains : array_like of shape (F, S), complex, optional
        Channel gains of the received symbols (perfect channel knowledge);
        required when the link has fading.

    Returns
    -------
    PosteriorResult

    Raises
    ------
    InputError
        Both or neither of ``llr`` / ``outputs``; a channel given with LLRs or
        missing with outputs; shape, NaN or channel mismatches; a decoder
        without soft output.

    Examples
    --------
    >>> import numpy as np
    >>> from ldpcmarg.code.parity_check import ParityCheckCode
    >>> spc = ParityCheckCode(np.array([[1, 1, 1]]))      # even-weight words of length 3
    >>> res = compute_posteriors(spc, outputs=[1, 0, 0], channel="bsc:p=0.1")
    >>> res.p1.round(4).tolist()   # codewords 000, 110, 101 one flip away, 011 three
    [[0.6639, 0.3361, 0.3361]]
    """
    if (llr is None) == (outputs is None):
        raise InputError("Give either channel LLRs or channel outputs (with a channel), not both.")
    link_meta = None
    if link is not None:
        if outputs is None:
            raise InputError("A link applies to received symbols: pass them as outputs= "
                             "(with gains= under fading and the noise level as channel=).")
        lk = _link_of(link, code)
        noise = link_noise(channel, lk)
        y, h = lk.check_received(outputs, gains)
        ch_llr = lk.receive(y, h, noise["esn0"])
        step = lk.quantizer_step(noise["esn0"])
        record = {**lk.record(), "scrambler": False}
        link_meta = {
            "channel": {"kind": "awgn", "ebn0_db": noise["ebn0_db"], "esn0_db": noise["esn0_db"],
                        "sigma": noise["sigma"], "noise_given": noise["given"], **record,
                        "quantizer_step": step, "gains": h is not None,
                        "symbols_per_frame": lk.symbols_per_frame},
            "link": {**lk.to_dict(), "scrambler": False},
        }
        channel = None
        input_kind = "received-symbols"
    elif gains is not None:
        raise InputError("Channel gains (gains=) apply only with a link (link=...).")
    if isinstance(channel, str):
        channel = parse_channel_spec(channel, rate=code.rate)
    if link_meta is not None:
        pass
    elif outputs is not None:
        if channel is None:
            raise InputError(
                "Channel outputs need the channel (AWGN Eb/N0, Es/N0 or sigma; BSC p; BEC epsilon)."
            )
        ch_llr = outputs_to_llr(outputs, channel, code.n)
        input_kind = "channel-outputs"
    else:
        if channel is not None:
            raise InputError(
                "A channel was given with LLR input; channel parameters apply only to channel "
                "outputs (drop the channel, or pass the outputs instead of LLRs)."
            )
        a = _frames_2d(np.asarray(llr), code.n, "LLRs")
        if a.dtype.kind == "b" or (np.all((a == 0) | (a == 1)) and np.any(a == 0)
                                   and np.any(a == 1)):
            raise InputError(
                "The LLRs are all 0 or 1 (both present), which looks like hard bits; for BSC "
                "outputs give the channel (--bsc P)."
            )
        ch_llr, _ = check_llr(a, code.n)
        input_kind = "llr"
    dec = _resolve_decoder(decoder, code)
    res = dec.decode(ch_llr)
    if res.posterior_llr is None:
        raise InputError(
            f"Decoder {dec.spec!r} gives hard decisions only; choose one with a soft output "
            "(e.g. sum-product)."
        )
    post = np.ascontiguousarray(res.posterior_llr, dtype=np.float64)
    F = post.shape[0]
    info = {}
    for k, v in (res.info or {}).items():
        a = np.asarray(v)
        if a.ndim >= 1 and a.shape[0] == F and a.dtype.kind in "biufU":
            info[str(k)] = a
        elif a.ndim >= 1 and a.shape[0] == F and a.dtype.kind == "O":
            try:  # e.g. per-frame status words held as objects
                info[str(k)] = a.astype(str)
            except (TypeError, ValueError):
                pass
    meta = {
        "format": _FORMAT_TAG,
        "version": _FORMAT_VERSION,
        "code": code.summary(),
        "decoder": dec.spec,
        "decoder_options": _json_options(dec.options),
        "channel": channel.to_dict() if channel is not None else None,
        "input": input_kind,
        **(link_meta or {}),
        "frames": int(F),
        "conventions": "p1 = P(x=1|y); llr = ln P(x=0|y) - ln P(x=1|y) (positive favours 0)",
    }
    return PosteriorResult(
        p1=expit(-post),
        llr=post,
        bits=np.asarray(res.bits, dtype=np.uint8),
        iterations=np.asarray(res.iterations, dtype=np.int64).reshape(F),
        valid=np.asarray(res.valid, dtype=bool).reshape(F),
        info=info,
        meta=meta,
    )


def _json_options(options: dict[str, Any]) -> dict[str, Any]:
    out: dict[str, Any] = {}
    for k, v in options.items():
        if isinstance(v, np.generic):
            v = v.item()
        if v is None or isinstance(v, bool | int | str):
            out[k] = v
        elif isinstance(v, float):
            out[k] = v if math.isfinite(v) else str(v)
        elif isinstance(v, np.ndarray) and v.dtype.kind in "biuf" and v.size <= 10_000:
            out[k] = [x if not isinstance(x, float) or math.isfinite(x) else str(x)
                      for x in v.ravel().tolist()]
        else:
            out[k] = str(v)
    return out


# -------------------------------------------------------------------- output
def _fmt_of(path: Path, fmt: str | None) -> str:
    if fmt is not None:
        f = fmt.lower().lstrip(".")
        if f not in OUTPUT_FORMATS:
            raise InputError(
                f"Unknown output format {fmt!r}; accepted: {', '.join(OUTPUT_FORMATS)}."
            )
        return f
    ext = path.suffix.lower().lstrip(".")
    if ext not in OUTPUT_FORMATS:
        raise InputError(
            f"Cannot tell the output format from {path.name!r}; use an extension among "
            + ", ".join("." + f for f in OUTPUT_FORMATS) + " (or give the format)."
        )
    return ext


def output_paths(path, fmt: str | None = None) -> dict[str, Path]:
    """Files written for an output path: role -> Path (see the module notes)."""
    p = Path(path)
    f = _fmt_of(p, fmt)
    if f == "npz":
        return {"bundle": p}
    if f == "npy":
        stem = p.with_suffix("") if p.suffix.lower() == ".npy" else p
        return {"p1": p, "llr": Path(f"{stem}.llr.npy"), "bits": Path(f"{stem}.bits.npy"),
                "sidecar": Path(f"{p}.json")}
    return {"table": p, "sidecar": Path(f"{p}.json")}


def _encode_array(a: np.ndarray) -> dict:
    a = np.asarray(a)
    if a.dtype.kind == "f":
        flat = [v if math.isfinite(v) else
                ("nan" if math.isnan(v) else ("inf" if v > 0 else "-inf"))
                for v in a.astype(np.float64).ravel().tolist()]
    elif a.dtype.kind == "b":
        flat = [bool(v) for v in a.ravel().tolist()]
    elif a.dtype.kind == "U":
        flat = [str(v) for v in a.ravel().tolist()]
    else:
        flat = [int(v) for v in a.ravel().tolist()]
    return {"dtype": a.dtype.str, "shape": list(a.shape), "data": flat}


def _decode_array(d: dict) -> np.ndarray:
    dt = np.dtype(d["dtype"])
    if dt.kind == "f":
        vals = [float(v) for v in d["data"]]  # float("nan"/"inf"/"-inf") parse the strings
    else:
        vals = d["data"]
    return np.asarray(vals, dtype=dt).reshape(d["shape"])


def _sidecar(result: PosteriorResult) -> dict:
    return {
        "meta": result.meta,
        "iterations": _encode_array(result.iterations),
        "valid": _encode_array(result.valid),
        "info": {k: _encode_array(v) for k, v in result.info.items()},
    }


def write_posteriors(result: PosteriorResult, path, *, fmt: str | None = None,
                     force: bool = False) -> list[Path]:
    """Write a :class:`PosteriorResult` as ``.npz``, ``.npy`` (+ sidecars) or long CSV.

    Parameters
    ----------
    result : PosteriorResult
    path : str or Path
        Output file; its extension selects the format unless ``fmt`` is given.
    fmt : {"npz", "npy", "csv"}, optional
    force : bool
        Overwrite existing files. Without it, nothing is written when any
        file of the bundle exists.

    Returns
    -------
    list of Path
        Every file written.
    """
    p = Path(path)
    f = _fmt_of(p, fmt)
    targets = output_paths(p, f)
    if not force:
        existing = [str(t) for t in targets.values() if t.exists()]
        if existing:
            raise InputError(
                f"Output file {existing[0]} exists; choose another name or pass force=True "
                "(--force on the command line) to overwrite."
            )
    for t in targets.values():
        if t.is_dir():
            raise InputError(f"Output path {t} is a directory.")
        if t.is_symlink() and not t.exists():
            raise InputError(f"Output path {t} is a symbolic link to a missing file; remove "
                             "the link or choose another name.")
        if not t.parent.is_dir():
            raise InputError(f"The folder {t.parent} of output {t} does not exist; create it "
                             "first.")
    if f == "npz":
        arrays = {"p1": result.p1, "llr": result.llr, "bits": result.bits,
                  "iterations": result.iterations, "valid": result.valid,
                  "meta": np.array(json.dumps(result.meta, allow_nan=False))}
        for k, v in result.info.items():
            arrays[f"info.{k}"] = np.asarray(v)
        with open(p, "wb") as fh:  # a file handle keeps numpy from appending ".npz"
            np.savez(fh, **arrays)
    elif f == "npy":
        np.save(targets["p1"], result.p1, allow_pickle=False)
        np.save(targets["llr"], result.llr, allow_pickle=False)
        np.save(targets["bits"], result.bits, allow_pickle=False)
        targets["sidecar"].write_text(json.dumps(_sidecar(result), indent=1, allow_nan=False))
    else:
        F, n = result.p1.shape
        frame = np.repeat(np.arange(F), n)
        bit = np.tile(np.arange(n), F)
        with open(p, "w", newline="") as fh:
            fh.write("frame,bit,p1,llr,hard_decision\n")
            for fr, b, pv, lv, hv in zip(frame.tolist(), bit.tolist(), result.p1.ravel().tolist(),
                                         result.llr.ravel().tolist(), result.bits.ravel().tolist(),
                                         strict=True):
                fh.write(f"{fr},{b},{pv!r},{lv!r},{hv}\n")
        targets["sidecar"].write_text(json.dumps(_sidecar(result), indent=1, allow_nan=False))
    return list(targets.values())


def read_posteriors(path, *, fmt: str | None = None) -> PosteriorResult:
    """Read back what :func:`write_posteriors` wrote.

    Parameters
    ----------
    path : str or Path
        The main output file (``.npz``, ``.npy`` or ``.csv``).
    fmt : {"npz", "npy", "csv"}, optional

    Returns
    -------
    PosteriorResult
    """
    p = Path(path)
    f = _fmt_of(p, fmt)
    targets = output_paths(p, f)
    missing = [str(t) for t in targets.values() if not t.exists()]
    if missing:
        raise InputError(f"Posterior file {missing[0]} is missing.")
    if f == "npz":
        z = read_npz_members(p, _input_error(p))
        need = ("p1", "llr", "bits", "iterations", "valid", "meta")
        absent = [k for k in need if k not in z]
        if absent:
            raise InputError(f"{p} is not a posteriors file (no {absent[0]!r} array).")
        info = {k[5:]: z[k] for k in z if k.startswith("info.")}
        try:
            meta = json.loads(str(z["meta"]))
        except (json.JSONDecodeError, ValueError) as exc:
            raise InputError(f"{p} has a damaged 'meta' entry ({exc}).") from None
        return PosteriorResult(p1=z["p1"], llr=z["llr"], bits=z["bits"],
                               iterations=z["iterations"], valid=z["valid"], info=info,
                               meta=meta)
    try:
        side = json.loads(targets["sidecar"].read_text())
        meta = side["meta"]
        iterations = _decode_array(side["iterations"])
        valid = _decode_array(side["valid"])
        info = {k: _decode_array(v) for k, v in side["info"].items()}
    except (json.JSONDecodeError, KeyError, TypeError, ValueError) as exc:
        raise InputError(f"{targets['sidecar']} is not a posteriors sidecar ({exc}).") from exc
    if f == "npy":
        return PosteriorResult(p1=np.load(targets["p1"], allow_pickle=False),
                               llr=np.load(targets["llr"], allow_pickle=False),
                               bits=np.load(targets["bits"], allow_pickle=False),
                               iterations=iterations, valid=valid, info=info, meta=meta)
    F = int(iterations.shape[0])
    n = int(meta["code"]["n"])
    with open(p) as fh:
        header = fh.readline().strip()
        if header != "frame,bit,p1,llr,hard_decision":
            raise InputError(f"{p} is not a posteriors CSV (header {header!r}).")
        rows = [ln.split(",") for ln in fh if ln.strip()]
    if len(rows) != F * n or any(len(r) != 5 for r in rows):
        raise InputError(f"{p} should hold {F * n} rows of 5 fields (F = {F}, n = {n}).")
    try:
        frame = np.fromiter((int(r[0]) for r in rows), dtype=np.int64, count=len(rows))
        bit = np.fromiter((int(r[1]) for r in rows), dtype=np.int64, count=len(rows))
        p1 = np.empty((F, n))
        llr = np.empty((F, n))
        bits = np.empty((F, n), dtype=np.uint8)
        p1[frame, bit] = [float(r[2]) for r in rows]
        llr[frame, bit] = [float(r[3]) for r in rows]
        bits[frame, bit] = [int(r[4]) for r in rows]
    except (ValueError, IndexError) as exc:
        raise InputError(f"{p} has a malformed row ({exc}).") from exc
    return PosteriorResult(p1=p1, llr=llr, bits=bits, iterations=iterations, valid=valid,
                           info=info, meta=meta)
