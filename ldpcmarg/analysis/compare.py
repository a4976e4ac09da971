"""Side-by-side comparison of decoders on the same frames.

For one code, one channel and a list of SNR points, every decoder decodes the
same seeded frames (random codewords through the channel). Per decoder and
point the comparison reports

* BER and FER against the transmitted codewords (all ``n`` bits count);
* how far the soft outputs are from a reference posterior: mean and maximum
  absolute error of ``P(x=1|y)`` and the mean per-bit Kullback–Leibler
  divergence ``KL(reference || decoder)`` of the Bernoulli posteriors, **in
  bits**. The reference is the exact posterior (enumeration or syndrome
  trellis, :mod:`ldpcmarg.decoders.exact`) when the code is small enough, or
  a decoder the caller names;
* calibration of the soft outputs against the transmitted bits
  (reliability-diagram data and expected calibration error, see
  :func:`ldpcmarg.analysis.llr_quality.calibration`) and the mutual information
  between transmitted bits and output LLRs;
* iterations and wall-clock time per frame.

Decoders without a soft output (``posterior_llr is None``) get error rates,
iterations and time; their soft-output metrics are ``None`` ("n/a").
"""

from __future__ import annotations

import math
import time
from dataclasses import dataclass, field
from typing import Any

import numpy as np
from scipy.special import expit

from .._text import plural
from ..decoders.base import Decoder, make_decoder
from ..errors import InputError, LdpcmargError
from ..link.channels import make_channel
from .llr_quality import CalibrationResult, calibration, mutual_information

__all__ = [
    "compare_decoders",
    "CompareResult",
    "DecoderPoint",
    "posterior_errors",
    "random_codewords",
    "SNR_UNITS",
]

#: SNR axis kinds: unit name -> (channel, axis label).
SNR_UNITS: dict[str, tuple[str, str]] = {
    "ebn0": ("awgn", "Eb/N0 (dB)"),
    "esn0": ("awgn", "Es/N0 (dB)"),
    "sigma": ("awgn", "noise std sigma"),
    "p": ("bsc", "BSC crossover probability p"),
    "epsilon": ("bec", "BEC erasure probability epsilon"),
}

_LN2 = math.log(2.0)


# ------------------------------------------------------------------ metrics
def _log_probs_from_p1(p1: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    with np.errstate(divide="ignore"):
        return np.log(p1), np.log1p(-p1)


def _log_probs_from_llr(llr: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    # ln P(1) = -ln(1 + e^L), ln P(0) = -ln(1 + e^-L)
    return -np.logaddexp(0.0, llr), -np.logaddexp(0.0, -llr)


def posterior_errors(ref_p1, llr=None, *, p1=None, ref_llr=None) -> dict[str, np.ndarray]:
    """Per-bit differences between a reference posterior and an approximate one.

    Parameters
    ----------
    ref_p1 : ndarray of shape (F, n), float64
        Reference ``P(x=1|y)`` (e.g. exact). Used for the probability error;
        for the KL divergence ``ref_llr`` is preferred when given.
    llr : ndarray of shape (F, n), float64, optional
        Approximate posterior LLRs (preferred: small probabilities stay accurate).
    p1 : ndarray of shape (F, n), float64, optional
        Approximate ``P(x=1|y)`` when LLRs are not available.
    ref_llr : ndarray of shape (F, n), float64, optional
        Reference posterior LLRs.

    Returns
    -------
    dict with
        ``abs_error`` : ndarray (F, n), ``|p1 - ref_p1|``;
        ``kl_bits`` : ndarray (F, n), ``KL(Bern(ref) || Bern(approx))`` in bits
        (``inf`` where the approximation gives probability 0 to an outcome the
        reference allows).
    """
    ref_p1 = np.asarray(ref_p1, dtype=np.float64)
    if llr is not None:
        llr = np.asarray(llr, dtype=np.float64)
        q1 = expit(-llr)
        lq1, lq0 = _log_probs_from_llr(llr)
    elif p1 is not None:
        q1 = np.asarray(p1, dtype=np.float64)
        lq1, lq0 = _log_probs_from_p1(q1)
    else:
        raise InputError("posterior_errors needs the approximate llr or p1.")
    if q1.shape != ref_p1.shape:
        raise InputError(f"Posterior shapes differ: reference {ref_p1.shape}, other {q1.shape}.")
    if ref_llr is not None:
        lp1, lp0 = _log_probs_from_llr(np.asarray(ref_llr, dtype=np.float64))
    else:
        lp1, lp0 = _log_probs_from_p1(ref_p1)
    pr1, pr0 = np.exp(lp1), np.exp(lp0)
    with np.errstate(invalid="ignore", over="ignore"):
        t1 = np.where(pr1 > 0, pr1 * (lp1 - lq1), 0.0)
        t0 = np.where(pr0 > 0, pr0 * (lp0 - lq0), 0.0)
    kl = np.maximum(t1 + t0, 0.0) / _LN2  # rounding can give -1e-17
    return {"abs_error": np.abs(q1 - ref_p1), "kl_bits": kl}


# --------------------------------------------------------------- codewords
def random_codewords(code, frames: int, rng: np.random.Generator) -> np.ndarray:
    """Uniformly random codewords of ``code``, shape (frames, n), uint8.

    Uniform messages of length k through the code's systematic encoder.
    """
    k = code.k
    if k == 0:
        return np.zeros((frames, code.n), dtype=np.uint8)
    msgs = rng.integers(0, 2, size=(frames, k), dtype=np.uint8)
    return np.asarray(code.encode(msgs), dtype=np.uint8)


# ------------------------------------------------------------------ results
@dataclass
class DecoderPoint:
    """Results of one decoder at one SNR point (``None`` marks "n/a").

    ``decoder`` is the canonical spec, ``label`` the name used in tables and
    legends, ``options`` every validated option of the decoder. Error rates
    count all ``n`` bits; ``mean_kl_bits`` is ``KL(reference || decoder)``
    per bit in bits; ``mutual_information`` is in bits per bit;
    ``time_per_frame_s`` is wall-clock seconds; ``bit_errors_sq`` is the sum
    over frames of the squared per-frame bit-error count (for a BER interval
    with frames as the sampling unit, :func:`ldpcmarg.engine.stats.ber_interval`).
    """

    decoder: str
    label: str
    snr: float
    frames: int
    n: int
    bit_errors: int
    frame_errors: int
    ber: float
    fer: float
    valid_fraction: float
    mean_abs_error: float | None
    max_abs_error: float | None
    mean_kl_bits: float | None
    ece: float | None
    mutual_information: float | None
    mi_stderr: float | None
    calibration: CalibrationResult | None
    mean_iterations: float
    max_iterations: int
    time_per_frame_s: float
    info_summary: dict[str, float] = field(default_factory=dict)
    soft: bool = True
    options: dict[str, Any] = field(default_factory=dict)
    bit_errors_sq: int = 0

    def to_dict(self) -> dict:
        d = {k: getattr(self, k) for k in (
            "decoder", "label", "snr", "frames", "n", "bit_errors", "bit_errors_sq",
            "frame_errors", "ber",
            "fer", "valid_fraction", "mean_abs_error", "max_abs_error", "mean_kl_bits", "ece",
            "mutual_information", "mi_stderr", "mean_iterations", "max_iterations",
            "time_per_frame_s", "info_summary", "soft", "options")}
        d["calibration"] = self.calibration.to_dict() if self.calibration is not None else None
        return _json_clean(d)


def _json_clean(obj):
    if isinstance(obj, dict):
        return {k: _json_clean(v) for k, v in obj.items()}
    if isinstance(obj, list | tuple):
        return [_json_clean(v) for v in obj]
    if isinstance(obj, np.generic):
        obj = obj.item()
    if isinstance(obj, float) and not math.isfinite(obj):
        return None if math.isnan(obj) else ("inf" if obj > 0 else "-inf")
    return obj


@dataclass
class CompareResult:
    """Everything :func:`compare_decoders` measured.

    Attributes
    ----------
    code : dict
        ``ParityCheckCode.summary()``.
    channel : str
        ``"awgn"``, ``"bsc"`` or ``"bec"``.
    snr_unit : str
        Key of :data:`SNR_UNITS`.
    snr_points : list of float
    frames : int
        Frames per point (the same frames for every decoder).
    seed : int
    reference : str
        ``"exact (<method>)"``, a decoder spec, or ``"none"``.
    reference_note : str
        Why there is no reference, when there is none.
    reference_time_per_frame_s : list of float or None
        Time of the reference per point.
    decoders : list of str
        Labels, in the order given.
    rows : list of DecoderPoint
        One per (point, decoder), points outermost.
    """

    code: dict
    channel: str
    snr_unit: str
    snr_points: list[float]
    frames: int
    seed: int
    reference: str
    reference_note: str
    reference_time_per_frame_s: list[float | None]
    decoders: list[str]
    rows: list[DecoderPoint]
    link: dict | None = None

    @property
    def snr_label(self) -> str:
        return SNR_UNITS[self.snr_unit][1]

    def for_decoder(self, label: str) -> list[DecoderPoint]:
        """Rows of one decoder, in SNR order."""
        return [r for r in self.rows if r.label == label]

    def to_dict(self) -> dict:
        return _json_clean({
            "code": self.code, "channel": self.channel, "link": self.link,
            "snr_unit": self.snr_unit,
            "snr_axis": self.snr_label, "snr_points": list(self.snr_points),
            "frames": self.frames, "seed": self.seed, "reference": self.reference,
            "reference_note": self.reference_note,
            "reference_time_per_frame_s": list(self.reference_time_per_frame_s),
            "decoders": list(self.decoders),
            "units": {"mean_kl_bits": "bits per bit", "mutual_information": "bits per bit",
                      "time_per_frame_s": "seconds", "ber": "all n bits",
                      "abs_error": "|P(x=1) - reference P(x=1)|"},
            "rows": [r.to_dict() for r in self.rows],
        })

    def format_table(self) -> str:
        """A readable fixed-width table (``n/a`` where a metric does not apply)."""
        def f(v, spec):
            width = int(spec.split(".")[0])
            if v is None or (isinstance(v, float) and math.isnan(v)):
                return "n/a".rjust(width)
            return format(v, spec)

        w = min(max([7] + [len(r.label) for r in self.rows]), 60)
        head = (f"{'SNR':>8} {'decoder':<{w}} {'BER':>9} {'FER':>9} {'mean|dp|':>9} "
                f"{'max|dp|':>9} {'KL(bit)':>9} {'ECE':>9} {'scale':>6} {'MI(bit)':>8} "
                f"{'iter':>6} {'ms/frame':>9}")
        lines = [
            f"code {self.code.get('name')} (n={self.code.get('n')}, k={self.code.get('k')}), "
            f"channel {self.channel}, {plural(self.frames, 'frame')} per point, seed {self.seed}",
            f"reference for posterior errors: {self.reference}"
            + (f" ({self.reference_note})" if self.reference_note else ""),
            f"SNR axis: {self.snr_label}; KL = KL(reference || decoder) per bit, in bits; "
            "ECE of the stated bit-error probability against the transmitted bits; "
            "scale = fitted LLR scale (< 1 over-confident, > 1 under-confident)",
            head, "-" * len(head),
        ]
        last = None
        for r in self.rows:
            if last is not None and r.snr != last:
                lines.append("")
            last = r.snr
            label = r.label if len(r.label) <= w else r.label[:w - 3] + "..."
            scale = None if r.calibration is None else r.calibration.llr_scale
            lines.append(
                f"{r.snr:>8g} {label:<{w}} {f(r.ber, '9.2e')} {f(r.fer, '9.2e')} "
                f"{f(r.mean_abs_error, '9.2e')} {f(r.max_abs_error, '9.2e')} "
                f"{f(r.mean_kl_bits, '9.2e')} {f(r.ece, '9.2e')} {f(scale, '6.2f')} "
                f"{f(r.mutual_information, '8.4f')} {r.mean_iterations:6.1f} "
                f"{1e3 * r.time_per_frame_s:9.3f}"
            )
        return "\n".join(lines)


# -------------------------------------------------------------- the engine
def _channel_for(unit: str, value: float, rate: float):
    kind = SNR_UNITS[unit][0]
    if unit == "ebn0":
        return make_channel("awgn", ebn0_db=value, rate=rate)
    if unit == "esn0":
        return make_channel("awgn", esn0_db=value, rate=rate)
    if unit == "sigma":
        return make_channel("awgn", sigma=value, rate=rate)
    if kind == "bsc":
        return make_channel("bsc", p=value)
    return make_channel("bec", epsilon=value)


def _exact_reference(code, llr, method):
    try:
        from ..decoders.exact import exact_posteriors
    except ModuleNotFoundError as exc:
        if exc.name == "ldpcmarg.decoders.exact":
            raise InputError("Exact posteriors are not available in this build.") from exc
        raise
    return exact_posteriors(code, llr, method=method)


def _info_summary(info: dict[str, Any], F: int) -> dict[str, float]:
    out = {}
    for k, v in (info or {}).items():
        a = np.asarray(v)
        if a.ndim == 1 and a.shape[0] == F and a.dtype.kind in "UO":
            words, counts = np.unique(a.astype(str), return_counts=True)
            if words.size <= 6:
                for w, c in zip(words.tolist(), counts.tolist(), strict=True):
                    out[f"{k}={w}_fraction"] = c / F
            continue
        if a.ndim != 1 or a.shape[0] != F or a.dtype.kind not in "biuf":
            continue
        af = a.astype(np.float64)
        fin = af[np.isfinite(af)]
        if a.dtype.kind == "b":
            out[f"{k}_fraction"] = float(af.mean())
        elif fin.size:
            out[f"{k}_mean"] = float(fin.mean())
            out[f"{k}_max"] = float(fin.max())
    return out


def json_options(options: dict[str, Any]) -> dict[str, Any]:
    """A decoder's validated options in JSON-ready form (arrays as lists, others as text)."""
    out = {}
    for k, v in options.items():
        if v is None or isinstance(v, bool | int | float | str):
            out[k] = v
        elif isinstance(v, np.generic):
            out[k] = v.item()
        elif isinstance(v, np.ndarray) and v.size <= 10_000:
            out[k] = v.tolist()
        else:
            out[k] = str(v)
    return _json_clean(out)


def _labels(decs: list[Decoder], given: list[str | None]) -> list[str]:
    # A spec string the caller wrote names the decoder as asked (options whose
    # values are not plain, such as array weights, can be missing from the
    # canonical spec); a built decoder is named by its canonical spec.
    labels, seen = [], {}
    for d, g in zip(decs, given, strict=True):
        s = g.strip() if g else d.spec
        seen[s] = seen.get(s, 0) + 1
        labels.append(s if seen[s] == 1 else f"{s} #{seen[s]}")
    return labels


def compare_decoders(code, decoders, *, snr, snr_unit: str = "ebn0", frames: int = 100,
                     seed: int = 0, reference: str = "auto", exact_method: str = "auto",
                     num_bins: int = 12, binning: str = "log", min_prob: float = 1e-6,
                     warmup: bool = True, progress=None,
                     labels: list[str] | None = None, link=None) -> CompareResult:
    """Run several decoders on the same frames and measure them.

    Parameters
    ----------
    code : ParityCheckCode
    decoders : list of str or Decoder
        Specs ``"name:opt=value,..."`` or built decoders (same code).
    snr : sequence of float
        SNR points in ``snr_unit``.
    snr_unit : {"ebn0", "esn0", "sigma", "p", "epsilon"}
        ``ebn0``/``esn0`` in dB (BPSK-AWGN; Eb/N0 uses the rate k/n),
        ``sigma`` the AWGN noise standard deviation, ``p`` the BSC crossover
        probability, ``epsilon`` the BEC erasure probability.
    frames : int
        Frames per point; every decoder gets the same frames.
    seed : int
        Frames at point ``j`` come from ``SeedSequence(seed, spawn_key=(j,))``.
    reference : str
        ``"auto"``: exact posteriors when the code allows it, otherwise no
        posterior-error metrics (the reason is kept in ``reference_note``);
        ``"exact"``: exact or fail; ``"none"``; or a decoder spec whose
        posteriors serve as the reference.
    exact_method : str
        Passed to ``exact_posteriors`` (``"auto"`` picks enumeration or trellis).
    num_bins, binning, min_prob
        Calibration bins (see :func:`ldpcmarg.analysis.llr_quality.calibration`);
        the default log bins suit decoder outputs spanning many decades.
    warmup : bool
        Decode one frame with each decoder before timing (keeps numba
        compilation out of the times).
    progress : callable, optional
        Called as ``progress(snr, label)`` before each decoder runs.
    link : ldpcmarg.link.link.Link, optional
        Send the frames over this link (modulation, fading, rate matching,
        quantiser); Eb/N0 uses its transmitted rate and bits per symbol. Exact
        posteriors then treat the bit LLRs as the channel (bits of one symbol
        are not independent, so this is the bitwise-interleaved receiver's view).
    labels : list of str, optional
        Names for the decoders in tables, JSON and legends (default: each
        decoder's canonical spec, ``#2``, ``#3`` appended to repeats).

    Returns
    -------
    CompareResult

    Examples
    --------
    >>> import numpy as np
    >>> from ldpcmarg.code.parity_check import ParityCheckCode
    >>> rep = ParityCheckCode(np.array([[1, 1, 0], [0, 1, 1]]), name="rep3")  # cycle-free
    >>> res = compare_decoders(rep, ["sum-product:early_stop=false"], snr=[2.0], frames=20)
    >>> res.reference, res.rows[0].max_abs_error < 1e-12
    ('exact (enumerate)', True)

    Notes
    -----
    Codewords are uniformly random (through the systematic encoder), so
    calibration and mutual information are measured on both bit values and
    asymmetric decoders are treated fairly. Times are wall-clock on a batch
    call, divided by the number of frames.
    """
    if snr_unit not in SNR_UNITS:
        raise InputError(f"Unknown SNR unit {snr_unit!r}; accepted: {', '.join(SNR_UNITS)}.")
    snr_points = [float(s) for s in np.atleast_1d(np.asarray(snr, dtype=np.float64))]
    if not snr_points:
        raise InputError("Give at least one SNR point.")
    if not (isinstance(frames, int | np.integer) and frames >= 1):
        raise InputError(f"frames must be an integer >= 1; got {frames!r}.")
    if not decoders:
        raise InputError("Give at least one decoder to compare.")
    decs: list[Decoder] = []
    for d in decoders:
        if isinstance(d, Decoder):
            if d.code.n != code.n:
                raise InputError(f"Decoder {d.spec!r} was built for another code length.")
            decs.append(d)
        else:
            decs.append(make_decoder(d, code))
    if labels is None:
        labels = _labels(decs, [d if isinstance(d, str) else None for d in decoders])
    else:
        labels = [str(x) for x in labels]
        if len(labels) != len(decs) or len(set(labels)) != len(labels):
            raise InputError("labels must give one distinct name per decoder.")
    ref_dec = None
    ref_kind = reference
    if reference not in ("auto", "exact", "none"):
        ref_dec = make_decoder(reference, code)
        if ref_dec.hard_output:
            raise InputError(f"The reference decoder {reference!r} has no soft output.")
        ref_kind = "decoder"
    # channels first: bad SNR values fail before any decoding
    channels = [_channel_for(snr_unit, s, code.rate) for s in snr_points]
    if link is not None and snr_unit not in ("ebn0", "esn0"):
        raise InputError("A link (modulation, fading, rate matching, quantiser) needs Eb/N0 "
                         "or Es/N0 points.")
    if warmup:
        w = np.zeros((1, code.n))
        w[0, :] = 2.0
        for d in decs + ([ref_dec] if ref_dec is not None else []):
            d.decode(w)
    rows: list[DecoderPoint] = []
    ref_name = "none"
    ref_note = ""
    ref_times: list[float | None] = []
    for j, (s, ch) in enumerate(zip(snr_points, channels, strict=True)):
        rng = np.random.default_rng(np.random.SeedSequence(seed, spawn_key=(j,)))
        if link is None:
            cw = random_codewords(code, int(frames), rng)
            llr = ch.sample_llr(cw, rng)
        else:
            cw = _link_codewords(code, link, int(frames), rng)
            es = link.esn0_linear(s) if snr_unit == "ebn0" else 10.0 ** (s / 10.0)
            llr = link.sample_llr(cw, es, rng)
        ref_p1 = ref_llr = None
        t_ref = None
        if ref_kind in ("auto", "exact"):
            try:
                t0 = time.perf_counter()
                ex = _exact_reference(code, llr, exact_method)
                t_ref = (time.perf_counter() - t0) / frames
                ref_p1 = np.asarray(ex.p1, dtype=np.float64)
                if getattr(ex, "posterior_llr", None) is not None:
                    ref_llr = np.asarray(ex.posterior_llr, dtype=np.float64)
                ref_name = f"exact ({ex.method})"
            except InputError as exc:
                if ref_kind == "exact":
                    raise
                ref_note = f"no exact posteriors: {exc}"
                ref_kind = "none"
        elif ref_kind == "decoder":
            t0 = time.perf_counter()
            rr = ref_dec.decode(llr)
            t_ref = (time.perf_counter() - t0) / frames
            ref_llr = np.asarray(rr.posterior_llr, dtype=np.float64)
            ref_p1 = expit(-ref_llr)
            ref_name = ref_dec.spec
        ref_times.append(t_ref)
        for d, label in zip(decs, labels, strict=True):
            if progress is not None:
                progress(s, label)
            t0 = time.perf_counter()
            try:
                res = d.decode(llr)
            except LdpcmargError as exc:
                raise type(exc)(f"{label}: {exc}") from exc
            dt = (time.perf_counter() - t0) / frames
            row = _measure(label, d.spec, s, cw, res, ref_p1, ref_llr, dt, num_bins, binning,
                           min_prob)
            row.options = json_options(d.options)
            rows.append(row)
    if ref_kind == "none" and not ref_note:
        ref_note = "no reference requested"
    return CompareResult(
        code=code.summary(), channel=SNR_UNITS[snr_unit][0], snr_unit=snr_unit,
        snr_points=snr_points, frames=int(frames), seed=int(seed), reference=ref_name,
        reference_note=ref_note if ref_name == "none" else "",
        reference_time_per_frame_s=ref_times, decoders=labels, rows=rows,
        link=None if link is None else link.record(),
    )


def _link_codewords(code, link, frames: int, rng) -> np.ndarray:
    """Random codewords with zeros at the link's shortened positions."""
    enc = code.encoder
    pos = np.asarray(enc.info_positions, dtype=np.int64)
    msgs = rng.integers(0, 2, size=(frames, pos.size), dtype=np.uint8)
    msgs[:, np.isin(pos, link.rate_matching.shortened)] = 0
    return np.asarray(enc.encode(msgs), dtype=np.uint8)


def _measure(label, spec, snr, cw, res, ref_p1, ref_llr, dt, num_bins, binning,
             min_prob) -> DecoderPoint:
    F, n = cw.shape
    bits = np.asarray(res.bits, dtype=np.uint8)
    wrong = bits != cw
    bit_errors = int(wrong.sum())
    per_frame = wrong.sum(axis=1).astype(np.int64)
    frame_errors = int((per_frame > 0).sum())
    it = np.asarray(res.iterations, dtype=np.float64).reshape(F)
    soft = res.posterior_llr is not None
    mae = mxe = kl = ece = mi = mi_se = None
    cal = None
    if soft:
        L = np.asarray(res.posterior_llr, dtype=np.float64)
        if ref_p1 is not None:
            pe = posterior_errors(ref_p1, L, ref_llr=ref_llr)
            mae = float(pe["abs_error"].mean())
            mxe = float(pe["abs_error"].max())
            kl = float(pe["kl_bits"].mean())
        cal = calibration(cw, L, num_bins=num_bins, binning=binning, min_prob=min_prob)
        ece = cal.ece
        mi, mi_se = mutual_information(cw, L, return_stderr=True)
    return DecoderPoint(
        decoder=spec, label=label, snr=float(snr), frames=F, n=n, bit_errors=bit_errors,
        frame_errors=frame_errors, ber=bit_errors / (F * n), fer=frame_errors / F,
        valid_fraction=float(np.mean(np.asarray(res.valid, dtype=bool))),
        mean_abs_error=mae, max_abs_error=mxe, mean_kl_bits=kl, ece=ece,
        mutual_information=mi, mi_stderr=mi_se, calibration=cal,
        mean_iterations=float(it.mean()), max_iterations=int(it.max()),
        time_per_frame_s=float(dt), info_summary=_info_summary(res.info, F), soft=soft,
        bit_errors_sq=int((per_frame * per_frame).sum()),
    )
