"""Decoders: the protocol and registry live in :mod:`ldpcmarg.decoders.base`."""

from .base import (
    Decoder,
    DecodeResult,
    decoder_names,
    make_decoder,
    parse_decoder_spec,
)

__all__ = ["DecodeResult", "Decoder", "decoder_names", "make_decoder", "parse_decoder_spec"]
