"""Code model: parity-check matrices, GF(2) algebra, constructions, file formats.

``ParityCheckCode`` (the Tanner graph and everything derived from ``H``) and
``LocalCodewords`` live in :mod:`ldpcmarg.code.parity_check`; they are
re-exported here so ``from ldpcmarg.code import ParityCheckCode`` works.
"""

from .parity_check import LocalCodewords, ParityCheckCode

__all__ = ["LocalCodewords", "ParityCheckCode"]
