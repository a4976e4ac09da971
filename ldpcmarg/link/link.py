"""The link as built: rate matching, interleaver, scrambler, modulation, fading, quantiser.

:class:`Link` turns codewords into the decoder's channel LLRs::

    codeword (n bits)
      -> drop punctured and shortened bits             (rate_matching)
      -> seeded bit interleaver pi (optional)
      -> pad to a whole number of symbols
      -> XOR a per-frame scrambler s (only when needed, see below)
      -> Gray/user labels -> symbols, Es = 1            (modulation)
      -> y = h s + w, complex noise N0 = 1/(Es/N0)      (fading)
      -> exact or max-log bit LLRs with perfect CSI     (modulation.demap)
      -> L <- (1 - 2 s) L, quantiser (optional), de-interleave
      -> n LLRs: punctured 0, shortened +LLR_MAX

SNR: ``Es/N0 = R_t * m * Eb/N0`` with the transmitted rate ``R_t`` and
``m`` bits per symbol. BPSK (``0 -> +1``) without fading uses real noise of
variance ``sigma^2 = N0/2`` and ``L = 2 y / sigma^2``, exactly the arithmetic
of :class:`~ldpcmarg.link.channels.AWGNChannel`.

Channels that are not output-symmetric per bit
----------------------------------------------
With 8-PSK and with 16-QAM and larger (and with most user constellations)
the bit channels are not output-symmetric: the error rate of a bit depends
on the transmitted symbol, so the all-zero word is not representative. The
link then applies the **channel-symmetrising scrambler** of DESIGN §9 (Hou,
Siegel, Milstein & Pfister 2003): a uniform random word ``s`` drawn per frame
from the chunk's noise stream is XORed onto the transmitted bits, and the
receiver flips the signs of the LLRs, ``L_i <- (1 - 2 s_i) L_i``. The
equivalent channel seen by the decoder is output-symmetric, so the all-zero
codeword (the engine's default) gives exactly the error statistics of random
codewords; the symbols on the air are uniformly distributed. BPSK and Gray
4-PSK are symmetric per bit and skip the scrambler (``Link.scrambled``).
"""

from __future__ import annotations

import hashlib
import math
from dataclasses import dataclass

import numpy as np

from .._settings import LLR_MAX
from ..errors import InputError
from .fading import Fading, parse_fading
from .modulation import (
    Constellation,
    demap,
    parse_modulation,
    psk,
    square_qam_channel,
    square_qam_demap,
)
from .quantize import Quantizer, parse_quantize
from .rate_matching import RateMatching

__all__ = ["Link", "Transmission", "build_link"]


@dataclass(frozen=True)
class Transmission:
    """What :meth:`Link.transmit` sent and what the receiver saw.

    Attributes
    ----------
    symbols : ndarray of shape (F, S)
        Received symbols ``y = h s + w`` (complex128; float64 for BPSK without fading).
    gains : ndarray of shape (F, S), complex128, or None
        Channel gains ``h`` (None without fading).
    scrambler : ndarray of shape (F, S*m), uint8, or None
        The scrambler word XORed onto the sent bits (None when not scrambled).
    llr : ndarray of shape (F, n), float64
        The link's decoder LLRs for these symbols.
    """

    symbols: np.ndarray
    gains: np.ndarray | None
    scrambler: np.ndarray | None
    llr: np.ndarray


def _ints(a: np.ndarray) -> str:
    return hashlib.sha256(np.asarray(a, dtype=np.int64).tobytes()).hexdigest()[:16]


@dataclass(frozen=True, eq=False)
class Link:
    """Everything between encoder and decoder for one code.

    Build with :func:`build_link` (or :meth:`Link.build`) from the command-line
    style specs. Picklable (plain arrays and values), so it ships to workers.

    Parameters
    ----------
    constellation : Constellation
    demapper : {"exact", "maxlog"}
    fading : Fading
    rate_matching : RateMatching
    quantizer : Quantizer or None
    interleaver_seed : int or None
        Seed of the bit interleaver (None = no interleaver).
    modulation_spec : str
        The modulation name as given (``qam16``, ``@points.txt``).
    """

    constellation: Constellation
    demapper: str
    fading: Fading
    rate_matching: RateMatching
    quantizer: Quantizer | None = None
    interleaver_seed: int | None = None
    modulation_spec: str = "bpsk"

    # ------------------------------------------------------------------ building
    @classmethod
    def build(cls, code, *, modulation: str | None = None, fading: str | Fading | None = None,
              puncture=None, shorten=None, quantize: str | Quantizer | None = None,
              interleaver: int | None = None, warn: bool = True) -> Link:
        """Validate every setting against ``code`` and build the link.

        Parameters
        ----------
        code : ParityCheckCode
        modulation : str, optional
            ``NAME[:maxlog]``; NAME in bpsk (default), qpsk, 8psk, qam16, qam64, qam256, @FILE.
        fading : str or Fading, optional
            ``none`` (default), ``rayleigh``, ``rician:K=<K>``, ``erasure:p=<p>``,
            each with optional ``,block=<symbols>``.
        puncture : int, str or array, optional
            ``<count>`` (first bits), ``@FILE`` (0/1 pattern) or bit indices.
        shorten : int or str, optional
            Number of information bits to shorten (the last information positions).
        quantize : str or Quantizer, optional
            ``q=<bits>[,step=<LLR step>]``.
        interleaver : int, optional
            Seed of a random bit interleaver over the transmitted bits.
        warn : bool
            Warn (:class:`~ldpcmarg.link.rate_matching.LinkWarning`) about punctured stopping sets.
        """
        if isinstance(modulation, Constellation):
            const, dem, spec = modulation, "exact", modulation.name
        else:
            const, dem = parse_modulation(modulation)
            spec = (str(modulation).strip() if modulation else "bpsk")
            spec = spec[:-len(":" + dem)] if spec.lower().endswith(":" + dem) else spec
        fad = fading if isinstance(fading, Fading) else parse_fading(fading)
        rm = RateMatching.build(code, puncture, shorten, warn=warn)
        qz = quantize if isinstance(quantize, Quantizer) or quantize is None else \
            parse_quantize(quantize)
        if interleaver is not None and (isinstance(interleaver, bool) or
                                        not isinstance(interleaver, int | np.integer)
                                        or interleaver < 0):
            raise InputError(f"The interleaver seed must be an integer >= 0; got "
                             f"{interleaver!r}.")
        return cls(const, dem, fad, rm, qz, None if interleaver is None else int(interleaver),
                   spec.lower() if not spec.startswith("@") else spec)

    # ------------------------------------------------------------------ facts
    @property
    def bits_per_symbol(self) -> int:
        return self.constellation.bits_per_symbol

    @property
    def n(self) -> int:
        return self.rate_matching.n

    @property
    def transmitted_rate(self) -> float:
        """``R_t = (k - s) / (n - p - s)``."""
        return self.rate_matching.rate

    @property
    def symbols_per_frame(self) -> int:
        return -(-self.rate_matching.n_sent // self.bits_per_symbol)

    @property
    def scrambled(self) -> bool:
        """True when the scrambler is applied (bit channels not output-symmetric)."""
        return not self._bit_symmetric

    @property
    def _bit_symmetric(self) -> bool:
        cache = self.__dict__.get("_sym_cache")
        if cache is None:
            cache = self.constellation.bit_symmetric
            object.__setattr__(self, "_sym_cache", cache)
        return cache

    @property
    def is_plain_bpsk(self) -> bool:
        """BPSK, no fading, rate matching, quantiser or interleaver: the classic AWGN link."""
        return (self.constellation.size == 2 and self.constellation.name == "bpsk"
                and self.demapper == "exact" and not self.fading.active
                and not self.rate_matching.active and self.quantizer is None
                and self.interleaver_seed is None)

    def esn0_linear(self, ebn0_db: float) -> float:
        """Linear Es/N0 for Eb/N0 in dB: ``R_t * m * 10**(Eb/N0 / 10)``."""
        return self.transmitted_rate * self.bits_per_symbol * 10.0 ** (float(ebn0_db) / 10.0)

    def ebn0_db(self, esn0_db: float) -> float:
        """Eb/N0 in dB for Es/N0 in dB."""
        return float(esn0_db) - 10.0 * math.log10(self.transmitted_rate * self.bits_per_symbol)

    def quantizer_step(self, esn0_lin: float) -> float | None:
        if self.quantizer is None:
            return None
        return self.quantizer.step_for(10.0 * math.log10(esn0_lin),
                                       self.constellation.min_distance)

    def _perm(self) -> np.ndarray | None:
        if self.interleaver_seed is None:
            return None
        cache = self.__dict__.get("_perm_cache")
        if cache is None:
            cache = np.random.default_rng(self.interleaver_seed).permutation(
                self.rate_matching.n_sent).astype(np.int64)
            object.__setattr__(self, "_perm_cache", cache)
        return cache

    # ------------------------------------------------------------------ the channel
    def sample_llr(self, codewords, esn0: float, rng: np.random.Generator, *,
                   linear: bool = True) -> np.ndarray:
        """Decoder LLRs for transmitted codewords.

        Parameters
        ----------
        codewords : ndarray of shape (F, n), uint8
            Codewords (all zero in the engine's default mode); shortened
            positions must be 0.
        esn0 : float
            Es/N0, linear (``linear=True``) or in dB.
        rng : numpy.random.Generator
            Draws, in this order: scrambler bits (when :attr:`scrambled`),
            fading gains, noise.

        Returns
        -------
        ndarray of shape (F, n), float64
            LLRs (positive favours 0); punctured bits 0, shortened ``+LLR_MAX``.
        """
        cw = np.asarray(codewords)
        if cw.ndim == 1:
            cw = cw[None, :]
        if cw.ndim != 2 or cw.shape[1] != self.n:
            raise InputError(f"Codewords must have shape (F, {self.n}); got {cw.shape}.")
        esn0_lin = self._esn0_lin(esn0, linear)
        rm = self.rate_matching
        F = cw.shape[0]
        m = self.bits_per_symbol
        sent_pos = rm.sent_positions
        nt = rm.n_sent
        sent = cw[:, sent_pos].astype(np.uint8, copy=False)
        perm = self._perm()
        if perm is not None:
            sent = sent[:, perm]
        S = -(-nt // m)
        pad = S * m - nt
        if self.scrambled:
            scr = rng.integers(0, 2, size=(F, S * m), dtype=np.uint8)
            stream = np.concatenate([sent, np.zeros((F, pad), np.uint8)], axis=1) ^ scr
        else:
            scr = None
            stream = sent if pad == 0 else np.concatenate(
                [sent, np.zeros((F, pad), np.uint8)], axis=1)
        h = self.fading.gains(F, S, rng)
        n0 = 1.0 / esn0_lin
        if self._is_bpsk:
            llr = self._bpsk_llr(stream, h, esn0_lin, rng)
        elif self.constellation.pam_levels is not None:
            z = rng.standard_normal((F, S, 2))
            llr = square_qam_channel(self.constellation, stream, h, z, n0,
                                     demapper=self.demapper)
        else:
            sym = self.constellation.modulate(stream)
            z = rng.standard_normal((F, S, 2))
            w = (z[..., 0] + 1j * z[..., 1]) * math.sqrt(n0 / 2.0)
            y = (sym if h is None else h * sym) + w
            llr = demap(self.constellation, y, 1.0 if h is None else h, n0,
                        demapper=self.demapper)
        return self._to_decoder(llr, scr, esn0_lin)

    @property
    def _is_bpsk(self) -> bool:
        return self.constellation.name == "bpsk" and self.constellation.size == 2

    def _to_decoder(self, llr: np.ndarray, scr, esn0_lin: float) -> np.ndarray:
        """Stream LLRs (F, S*m) -> decoder LLRs (F, n): descramble, quantise, de-interleave,
        re-insert punctured (0) and shortened (+LLR_MAX) bits."""
        rm = self.rate_matching
        nt = rm.n_sent
        F = llr.shape[0]
        perm = self._perm()
        llr = llr[:, :nt]
        if scr is not None:
            llr *= 1.0 - 2.0 * scr[:, :nt]
        if self.quantizer is not None:
            llr = self.quantizer.apply(llr, self.quantizer_step(esn0_lin))
        np.clip(llr, -LLR_MAX, LLR_MAX, out=llr)
        if perm is not None:
            back = np.empty_like(llr)
            back[:, perm] = llr
            llr = back
        if not rm.active:
            return np.ascontiguousarray(llr)
        out = np.zeros((F, self.n), dtype=np.float64)
        out[:, rm.sent_positions] = llr
        out[:, rm.shortened] = LLR_MAX
        return out

    # ------------------------------------------------------------------ received data
    def transmit(self, codewords, esn0: float, rng: np.random.Generator, *,
                 linear: bool = True, scramble: bool = False) -> Transmission:
        """Send codewords and keep what a receiver sees: symbols, gains and the LLRs.

        The draws and the arithmetic are those of :meth:`sample_llr`; with
        ``scramble=True`` (on a link whose :attr:`scrambled` is set) the two
        give the same LLRs bit for bit for the same ``rng`` state. Real data
        are not scrambled (``scramble=False``, the default): the symbols then
        carry the codeword bits themselves, as a real transmitter sends them.

        Parameters
        ----------
        codewords : ndarray of shape (F, n), uint8
            Codewords; shortened positions must be 0.
        esn0 : float
            Es/N0, linear (``linear=True``) or in dB.
        rng : numpy.random.Generator
        scramble : bool
            Apply the simulator's channel-symmetrising scrambler (only when
            :attr:`scrambled`).

        Returns
        -------
        Transmission
            ``symbols`` (F, S): complex128, or float64 for BPSK without
            fading (real noise only); ``gains`` (F, S) complex128 or None;
            ``scrambler`` (F, S*m) uint8 or None; ``llr`` (F, n) float64 --
            exactly what :meth:`receive` returns for these symbols and gains.
        """
        cw = np.asarray(codewords)
        if cw.ndim == 1:
            cw = cw[None, :]
        if cw.ndim != 2 or cw.shape[1] != self.n:
            raise InputError(f"Codewords must have shape (F, {self.n}); got {cw.shape}.")
        esn0_lin = self._esn0_lin(esn0, linear)
        rm = self.rate_matching
        F = cw.shape[0]
        m = self.bits_per_symbol
        nt = rm.n_sent
        sent = cw[:, rm.sent_positions].astype(np.uint8, copy=False)
        perm = self._perm()
        if perm is not None:
            sent = sent[:, perm]
        S = -(-nt // m)
        stream = np.concatenate([sent, np.zeros((F, S * m - nt), np.uint8)], axis=1)
        scr = None
        if scramble and self.scrambled:
            scr = rng.integers(0, 2, size=(F, S * m), dtype=np.uint8)
            stream = stream ^ scr
        h = self.fading.gains(F, S, rng)
        n0 = 1.0 / esn0_lin
        if self._is_bpsk:
            sigma = math.sqrt(1.0 / (2.0 * esn0_lin))
            x = 1.0 - 2.0 * stream.astype(np.float64)
            if h is None:
                y = rng.standard_normal((F, S))
                y *= sigma
                y += x
            else:
                z = rng.standard_normal((F, S, 2))
                y = h * x + (z[..., 0] + 1j * z[..., 1]) * sigma
        elif self.constellation.pam_levels is not None:
            # y = h x + w formed part by part in the order of the fused kernel of
            # square_qam_channel (numpy's complex product may round differently)
            sym = self.constellation.modulate(stream)
            z = rng.standard_normal((F, S, 2))
            sigma = math.sqrt(n0 / 2.0)
            xr, xq = sym.real, sym.imag
            if h is None:
                yr, yi = xr + sigma * z[..., 0], xq + sigma * z[..., 1]
            else:
                hr, hi = h.real, h.imag
                yr = hr * xr - hi * xq + sigma * z[..., 0]
                yi = hr * xq + hi * xr + sigma * z[..., 1]
            y = np.empty((F, S), dtype=np.complex128)
            y.real = yr
            y.imag = yi
        else:
            sym = self.constellation.modulate(stream)
            z = rng.standard_normal((F, S, 2))
            w = (z[..., 0] + 1j * z[..., 1]) * math.sqrt(n0 / 2.0)
            y = (sym if h is None else h * sym) + w
        llr = self._demap_received(y, h, esn0_lin)
        return Transmission(symbols=y, gains=h, scrambler=scr,
                            llr=self._to_decoder(llr, scr, esn0_lin))

    def check_received(self, symbols, gains=None) -> tuple[np.ndarray, np.ndarray | None]:
        """Validate received symbols (and gains) for this link; return them as (F, S) arrays.

        Parameters
        ----------
        symbols : array_like of shape (F, S) or (S,)
            Complex received symbols ``y = h s + w``; real values are accepted
            when every constellation point is real (BPSK, user PAM).
        gains : array_like of the same shape, optional
            Channel gains ``h`` known at the receiver; required with fading.

        Returns
        -------
        (symbols, gains) : ndarray (F, S) complex128 (float64 for real BPSK
            data without gains) and ndarray (F, S) complex128 or None.

        Raises
        ------
        InputError
            Wrong number of symbols per frame, real data for a complex
            constellation, non-numeric or non-finite values, gains missing
            with fading or of another shape.
        """
        S = self.symbols_per_frame
        y = np.asarray(symbols)
        if y.ndim == 1:
            y = y[None, :]
        if y.dtype.kind not in "biufc":
            raise InputError(f"Received symbols must be numeric; got dtype {y.dtype}.")
        if y.ndim != 2 or y.shape[1] != S or y.shape[0] == 0:
            raise InputError(
                f"The received data have shape {y.shape}; this link sends S = {S} symbols "
                f"per frame (n = {self.n}, {self.rate_matching.punctured.size} punctured, "
                f"{self.rate_matching.shortened.size} shortened, m = {self.bits_per_symbol} "
                f"bits per symbol), so give an array of shape (F, {S}).")
        if y.dtype.kind != "c" and not self.constellation.is_real:
            raise InputError(
                f"The received symbols are real, but {self.modulation_spec} is a complex "
                "constellation; give complex symbols (a complex .npy/.npz array).")
        if not np.all(np.isfinite(y)):
            f, s = (int(v[0]) for v in np.nonzero(~np.isfinite(y)))
            raise InputError(f"The received symbols contain NaN or infinite values (frame {f}, "
                             f"symbol {s}).")
        h = None
        if gains is not None:
            h = np.asarray(gains)
            if h.ndim == 1:
                h = h[None, :]
            if h.dtype.kind not in "biufc":
                raise InputError(f"Channel gains must be numeric; got dtype {h.dtype}.")
            if h.shape != y.shape:
                raise InputError(f"The channel gains have shape {h.shape}, the received symbols "
                                 f"{y.shape}; give one gain per symbol.")
            if not np.all(np.isfinite(h)):
                raise InputError("The channel gains contain NaN or infinite values.")
            h = np.ascontiguousarray(h, dtype=np.complex128)
        elif self.fading.active:
            raise InputError(
                f"With --fading {self.fading.label()} the receiver needs the channel gains: "
                f"store them as the array 'h' of shape (F, {S}) beside the symbols 'y' in the "
                ".npz input (perfect channel knowledge).")
        if self._is_bpsk and h is None and y.dtype.kind != "c":
            return np.ascontiguousarray(y, dtype=np.float64), None
        return np.ascontiguousarray(y, dtype=np.complex128), h

    def receive(self, symbols, gains=None, esn0: float = 1.0, *,
                linear: bool = True) -> np.ndarray:
        """Decoder LLRs for received symbols: demap, de-interleave, re-insert, quantise.

        Parameters
        ----------
        symbols : array_like of shape (F, S) or (S,)
            Received symbols, ``S = symbols_per_frame``; see :meth:`check_received`.
        gains : array_like of shape (F, S), optional
            Channel gains (perfect channel knowledge); required with fading.
        esn0 : float
            Es/N0, linear (``linear=True``) or in dB; Es = 1, N0 = 1/(Es/N0).

        Returns
        -------
        ndarray of shape (F, n), float64
            Punctured bits 0, shortened ``+LLR_MAX``; no descrambling (received
            data are assumed to carry the codeword bits).
        """
        y, h = self.check_received(symbols, gains)
        esn0_lin = self._esn0_lin(esn0, linear)
        return self._to_decoder(self._demap_received(y, h, esn0_lin), None, esn0_lin)

    def _esn0_lin(self, esn0, linear) -> float:
        esn0_lin = float(esn0) if linear else 10.0 ** (float(esn0) / 10.0)
        if not (math.isfinite(esn0_lin) and esn0_lin > 0):
            raise InputError(f"Es/N0 must be a positive finite value; got {esn0!r}.")
        return esn0_lin

    def _demap_received(self, y, h, esn0_lin) -> np.ndarray:
        """Stream LLRs (F, S*m) of validated symbols; the arithmetic of :meth:`sample_llr`."""
        n0 = 1.0 / esn0_lin
        if self._is_bpsk:
            sigma = math.sqrt(1.0 / (2.0 * esn0_lin))
            if h is None:
                return np.ascontiguousarray(np.real(y), dtype=np.float64) * (2.0 / sigma**2)
            y = np.asarray(y, dtype=np.complex128)
            return (2.0 / sigma**2) * (h.real * y.real + h.imag * y.imag)
        if self.constellation.pam_levels is not None:
            return square_qam_demap(self.constellation, y, h, n0, demapper=self.demapper)
        return demap(self.constellation, y, 1.0 if h is None else h, n0, demapper=self.demapper)

    def _bpsk_llr(self, stream, h, esn0_lin, rng):
        """BPSK closed form: real noise and ``2 y / sigma^2`` (complex with fading)."""
        F, nbits = stream.shape
        sigma = math.sqrt(1.0 / (2.0 * esn0_lin))
        x = 1.0 - 2.0 * stream.astype(np.float64)
        if h is None:
            llr = rng.standard_normal((F, nbits))
            llr *= sigma
            llr += x
            llr *= 2.0 / sigma**2
            return llr
        z = rng.standard_normal((F, nbits, 2))
        y = h * x + (z[..., 0] + 1j * z[..., 1]) * sigma
        # coherent detection: Re(conj(h) y) = |h|^2 x + N(0, |h|^2 sigma^2)
        return (2.0 / sigma**2) * (h.real * y.real + h.imag * y.imag)

    # ------------------------------------------------------------------ records
    def to_dict(self) -> dict:
        """Identity of the link (every setting that changes the frames); JSON-ready."""
        rm = self.rate_matching
        return {"modulation": self.modulation_spec, "constellation": self.constellation.digest,
                "demapper": self.demapper, "fading": self.fading.to_dict(),
                "puncture": _ints(rm.punctured), "shorten": _ints(rm.shortened),
                "quantize": None if self.quantizer is None else self.quantizer.to_dict(),
                "interleaver": self.interleaver_seed, "scrambler": self.scrambled}

    def record(self) -> dict:
        """The JSON ``channel`` fields describing the link."""
        rm = self.rate_matching
        return {"modulation": self.modulation_spec, "demapper": self.demapper,
                "bits_per_symbol": self.bits_per_symbol, "fading": self.fading.kind,
                "fading_spec": self.fading.label(), "block": int(self.fading.block),
                "puncture": int(rm.punctured.size), "shorten": int(rm.shortened.size),
                "quantize": None if self.quantizer is None else self.quantizer.label(),
                "interleaver": self.interleaver_seed, "scrambler": self.scrambled,
                "transmitted_rate": self.transmitted_rate,
                "punctured_stopping_set": int(rm.undecodable)}

    def label(self) -> str:
        """Short text for plot titles and tables."""
        parts = [self.modulation_spec + (":maxlog" if self.demapper == "maxlog" else "")]
        if self.fading.active:
            parts.append(self.fading.label())
        rm = self.rate_matching
        if rm.punctured.size:
            parts.append(f"punct {rm.punctured.size}")
        if rm.shortened.size:
            parts.append(f"short {rm.shortened.size}")
        if self.quantizer is not None:
            parts.append(self.quantizer.label())
        parts.append(f"R_t={self.transmitted_rate:.4g}")
        return ", ".join(parts)


def build_link(code, **kw) -> Link:
    """Shorthand for :meth:`Link.build`."""
    return Link.build(code, **kw)


def default_link(code) -> Link:
    """BPSK, no fading, no rate matching: the classic AWGN link."""
    return Link(psk(2), "exact", Fading(), RateMatching.build(code), None, None, "bpsk")
