"""Decoder protocol, result type and the registry of decoder names.

Every decoder is a plain, picklable object built from a code and options::

    dec = make_decoder("min-sum:alpha=0.8,max_iter=30", code)
    res = dec.decode(llr)          # llr: (F, n) or (n,) float

The registry maps names to ``(module, class, one-line description)`` and
imports a decoder's module only when it is asked for, so the CLI starts fast
and HiGHS is loaded only by the LP-based decoders.
"""

from __future__ import annotations

import importlib
from dataclasses import dataclass, field
from typing import Any

import numpy as np

from .._params import Param, describe_options, parse_option_value, validate_options
from ..errors import InputError

__all__ = [
    "DecodeResult",
    "Decoder",
    "make_decoder",
    "decoder_names",
    "decoder_class",
    "parse_decoder_spec",
    "format_decoder_spec",
    "check_llr",
]


@dataclass
class DecodeResult:
    """Output of :meth:`Decoder.decode` for a batch of F frames.

    Attributes
    ----------
    bits : ndarray of shape (F, n), uint8
        Hard decisions.
    posterior_llr : ndarray of shape (F, n), float64, or None
        Posterior (soft-output) LLRs ``ln P(x=0|y) - ln P(x=1|y)``; None for
        hard-decision decoders.
    iterations : ndarray of shape (F,), int64
        Iterations performed per frame.
    valid : ndarray of shape (F,), bool
        Hard decision satisfies every parity check.
    info : dict of str to ndarray
        Per-frame extras, each an array with first dimension F
        (``ml_certificate``, ``duality_gap``, ``log_partition_bound``, ...).
    """

    bits: np.ndarray
    posterior_llr: np.ndarray | None
    iterations: np.ndarray
    valid: np.ndarray
    info: dict[str, Any] = field(default_factory=dict)

    @property
    def posterior_p1(self) -> np.ndarray | None:
        """Posterior probabilities ``P(x_i = 1 | y)``, shape (F, n), float64 (None if hard)."""
        if self.posterior_llr is None:
            return None
        # 1 / (1 + e^L); expit keeps relative precision for large |L|
        from scipy.special import expit

        return expit(-self.posterior_llr)


def check_llr(llr, n: int, *, allow_inf: bool = False) -> tuple[np.ndarray, bool]:
    """Validate and normalise channel LLRs at a decoder's boundary.

    Parameters
    ----------
    llr : array_like of shape (F, n) or (n,), float32 or float64
    n : int
        Code length.
    allow_inf : bool
        Accept +-inf (only decoders that saturate them safely).

    Returns
    -------
    llr2d : ndarray of shape (F, n), float64, C-contiguous
    single : bool
        True when the input was one frame of shape (n,).
    """
    a = np.asarray(llr)
    if a.dtype.kind not in "fiu":
        raise InputError(f"LLRs must be a float array; got dtype {a.dtype}.")
    single = a.ndim == 1
    if a.ndim not in (1, 2):
        raise InputError(f"LLRs must have shape (F, n) or (n,); got shape {a.shape}.")
    a2 = a[None, :] if single else a
    if a2.shape[1] != n:
        raise InputError(f"LLR frames must have length n = {n}; got length {a2.shape[1]}.")
    a2 = np.ascontiguousarray(a2, dtype=np.float64)
    if np.isnan(a2).any():
        f, i = (int(v) for v in np.argwhere(np.isnan(a2))[0])
        raise InputError(f"LLRs contain NaN (frame {f}, bit {i}).")
    if not allow_inf and np.isinf(a2).any():
        f, i = (int(v) for v in np.argwhere(np.isinf(a2))[0])
        raise InputError(f"LLRs contain an infinite value (frame {f}, bit {i}); clip them first.")
    return a2, single


class Decoder:
    """Base class of all decoders.

    Subclasses set ``name``, ``description`` and ``params`` (a dict of
    :class:`~ldpcmarg._params.Param`) and implement :meth:`_decode` on a
    validated (F, n) float64 array. ``hard_output`` is True for decoders
    with no soft output. ``symmetric`` is True when decoding commutes with
    codeword translation (then the all-zero codeword may be simulated).
    """

    name = "decoder"
    description = ""
    params: dict[str, Param] = {}
    hard_output = False
    symmetric = True

    def __init__(self, code, **options):
        self.code = code
        self.options = validate_options(self.name, self.params, options)
        self._setup()

    def _setup(self) -> None:
        """Hook for precomputation after options are validated."""

    @property
    def spec(self) -> str:
        """Canonical ``name:opt=value,...`` string with the non-default options."""
        shown = {}
        scalar = str | int | float | bool
        for k, v in self.options.items():
            if v is None or not isinstance(v, scalar):
                continue  # unset, or an array (no spec-string form)
            default = self.params[k].default
            if isinstance(default, scalar) and v == default:
                continue
            shown[k] = v
        return format_decoder_spec(self.name, shown)

    def decode(self, llr) -> DecodeResult:
        """Decode a batch of frames.

        Parameters
        ----------
        llr : ndarray of shape (F, n) or (n,), float
            Channel LLRs ``ln P(y|x=0) - ln P(y|x=1)`` (positive favours 0).

        Returns
        -------
        DecodeResult
            Arrays with first dimension F (F = 1 for a single frame).
        """
        llr2, _ = check_llr(llr, self.code.n)
        return self._decode(llr2)

    def _decode(self, llr: np.ndarray) -> DecodeResult:
        raise NotImplementedError

    def __repr__(self) -> str:
        return f"<{type(self).__name__} {self.spec} on {self.code.name}>"


class HardDecisionDecoder(Decoder):
    """No decoding: the sign of each channel LLR (uncoded reference)."""

    name = "hard-decision"
    description = "No decoding: bit-wise sign of the channel LLR (uncoded BPSK reference)."
    params: dict[str, Param] = {}

    def _decode(self, llr):
        bits = (llr < 0).astype(np.uint8)
        return DecodeResult(
            bits=bits,
            posterior_llr=llr.copy(),
            iterations=np.zeros(llr.shape[0], dtype=np.int64),
            valid=np.asarray(self.code.is_codeword(bits), dtype=bool).reshape(-1),
            info={},
        )


# name -> (module under ldpcmarg.decoders, class name, one-line description)
_REGISTRY: dict[str, tuple[str, str, str]] = {
    "hard-decision": ("base", "HardDecisionDecoder",
                      "No decoding: bit-wise sign of the channel LLR (uncoded reference)."),
    "sum-product": ("message_passing", "SumProductDecoder",
                    "Sum-product (belief propagation) in the LLR domain, flooding schedule."),
    "layered-sum-product": ("message_passing", "LayeredSumProductDecoder",
                            "Sum-product with a layered (row-serial) schedule."),
    "min-sum": ("message_passing", "MinSumDecoder",
                "Normalised min-sum, flooding (alpha=1 is plain min-sum)."),
    "offset-min-sum": ("message_passing", "OffsetMinSumDecoder",
                       "Offset min-sum, flooding (offset beta)."),
    "layered-min-sum": ("message_passing", "LayeredMinSumDecoder",
                        "Normalised min-sum with a layered schedule."),
    "reweighted-sum-product": ("message_passing", "ReweightedSumProductDecoder",
                               "Tree-reweighted sum-product with edge weights rho (damped)."),
    "fixed-min-sum": ("fixed_point", "FixedMinSumDecoder",
                      "Fixed-point normalised min-sum (q-bit messages), flooding."),
    "fixed-offset-min-sum": ("fixed_point", "FixedOffsetMinSumDecoder",
                             "Fixed-point offset min-sum (q-bit messages), flooding."),
    "fixed-layered-min-sum": ("fixed_point", "FixedLayeredMinSumDecoder",
                              "Fixed-point normalised min-sum (q-bit messages), layered."),
    "fixed-layered-offset-min-sum": ("fixed_point", "FixedLayeredOffsetMinSumDecoder",
                                     "Fixed-point offset min-sum (q-bit messages), layered."),
    "bit-flipping": ("hard_decision", "BitFlippingDecoder",
                     "Guarded bit flipping for the BSC (flips while unsatisfied checks fall)."),
    "gallager-a": ("hard_decision", "GallagerADecoder",
                   "Gallager A binary message passing for the BSC (unanimous flip rule)."),
    "gallager-b": ("hard_decision", "GallagerBDecoder",
                   "Gallager B binary message passing for the BSC (threshold b)."),
    "lp": ("lp", "LPDecoder",
           "LP decoding over the local polytope (HiGHS), with ML certificate."),
    "ml": ("lp", "MLDecoder", "Block-ML decoding as a HiGHS MIP (moderate codes)."),
    "exact": ("exact", "ExactDecoder",
              "Exact bitwise posteriors and ML by enumeration or syndrome trellis (small codes)."),
    "fw": ("frank_wolfe", "FrankWolfeDecoder",
           "Frank-Wolfe bitwise marginals (Bethe/TRW free energy) with an LP oracle."),
    "osd": ("osd", "OSDDecoder",
            "Ordered-statistics decoding of order 0..k (k = block-ML), optional list soft output."),
}


def decoder_class(name: str) -> type[Decoder]:
    """The class registered under ``name`` (imports its module on first use)."""
    if name not in _REGISTRY:
        raise InputError(
            f"Unknown decoder {name!r}; accepted: {', '.join(sorted(_REGISTRY))}."
        )
    module, cls, _ = _REGISTRY[name]
    try:
        mod = importlib.import_module(f"ldpcmarg.decoders.{module}")
    except ModuleNotFoundError as exc:  # only while a decoder family is missing
        if exc.name == f"ldpcmarg.decoders.{module}":
            raise InputError(f"Decoder {name!r} is not available in this build.") from exc
        raise
    return getattr(mod, cls)


def decoder_names() -> dict[str, str]:
    """Registered decoder names with a one-line description each."""
    return {name: desc for name, (_, _, desc) in _REGISTRY.items()}


def parse_decoder_spec(spec: str) -> tuple[str, dict[str, Any]]:
    """Split ``"name:opt=value,opt2=value2"`` into the name and an options dict.

    Values are parsed as int, float, bool or string; the decoder checks them.
    """
    if not isinstance(spec, str) or not spec.strip():
        raise InputError(f"A decoder spec must be a non-empty string; got {spec!r}.")
    name, _, rest = spec.strip().partition(":")
    opts: dict[str, Any] = {}
    if rest.strip():
        for item in rest.split(","):
            key, eq, value = item.partition("=")
            if not eq or not key.strip():
                raise InputError(
                    f"Malformed decoder option {item!r} in {spec!r}; "
                    "expected name:key=value,key=value."
                )
            opts[key.strip().replace("-", "_")] = parse_option_value(value)
    return name.strip(), opts


def format_decoder_spec(name: str, options: dict[str, Any]) -> str:
    """Inverse of :func:`parse_decoder_spec` (options sorted by name)."""
    if not options:
        return name
    return name + ":" + ",".join(f"{k}={options[k]}" for k in sorted(options))


def make_decoder(name: str, code, **options) -> Decoder:
    """Build a decoder from a registered name or a full spec string.

    Parameters
    ----------
    name : str
        A name from :func:`decoder_names`, optionally with options:
        ``"min-sum:alpha=0.8,max_iter=30"``.
    code : ParityCheckCode
    **options
        Further options (override those in the spec string).

    Raises
    ------
    InputError
        Unknown name, unknown option (the message lists the accepted ones) or
        an out-of-range value.
    """
    base, spec_opts = parse_decoder_spec(name)
    spec_opts.update({k.replace("-", "_"): v for k, v in options.items()})
    cls = decoder_class(base)
    return cls(code, **spec_opts)


def describe_decoder(name: str) -> str:
    """Description and options of one decoder, for ``--help`` style listings."""
    cls = decoder_class(name)
    return f"{name}: {cls.description}\n" + describe_options(cls.params)
