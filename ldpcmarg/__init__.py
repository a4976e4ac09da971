"""ldpcmarg: soft-output decoding lab for binary LDPC codes.

Main entry points::

    import ldpcmarg as lm
    code = lm.load_code("tanner-155-64")
    dec = lm.make_decoder("sum-product", code, max_iter=50)
    res = dec.decode(llr)

The package is grouped by layer: ``code/`` (code model, GF(2), constructions,
files), ``link/`` (channels), ``decoders/``, ``engine/`` (Monte Carlo sweep,
store, executors), ``analysis/``, ``plots/``; the names below are the public
entry points.
"""

from ._version import __version__
from .code.parity_check import ParityCheckCode
from .decoders.base import Decoder, DecodeResult, decoder_names, make_decoder
from .engine.simulate import simulate
from .errors import (
    CodeFileError,
    InputError,
    LdpcmargError,
    MissingExtraError,
    ResourceError,
    SolverError,
    StoreError,
)
from .link.channels import make_channel


def load_code(name_or_path, **kwargs):
    """Load a shipped code by name or a parity-check matrix file (.mtx, .txt, .npz).

    See :func:`ldpcmarg.code.io.load_code`.
    """
    from .code.io import load_code as _load

    return _load(name_or_path, **kwargs)


def save_code(code, path, fmt=None):
    """Write a code's parity-check matrix (.mtx, .txt or .npz).

    See :func:`ldpcmarg.code.io.save_code`.
    """
    from .code.io import save_code as _save

    return _save(code, path, fmt=fmt)


__all__ = [
    "__version__",
    "ParityCheckCode",
    "DecodeResult",
    "Decoder",
    "decoder_names",
    "make_decoder",
    "make_channel",
    "simulate",
    "load_code",
    "save_code",
    "LdpcmargError",
    "InputError",
    "SolverError",
    "StoreError",
    "CodeFileError",
    "MissingExtraError",
    "ResourceError",
]
