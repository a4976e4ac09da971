"""Shared fixtures."""

from __future__ import annotations

import numpy as np
import pytest

from ldpcmarg.code.parity_check import ParityCheckCode

# Hamming(7,4) parity-check matrix, columns are the binary numbers 1..7
# (standard textbook form; MacWilliams & Sloane ch. 1).
HAMMING_7_4 = np.array(
    [[1, 0, 1, 0, 1, 0, 1],
     [0, 1, 1, 0, 0, 1, 1],
     [0, 0, 0, 1, 1, 1, 1]], dtype=np.uint8)


@pytest.fixture
def hamming74() -> ParityCheckCode:
    return ParityCheckCode(HAMMING_7_4, name="hamming-7-4")


@pytest.fixture(params=[0, 1, 2])
def seed(request) -> int:
    """A few fixed seeds, so statistical checks are repeatable yet not tuned to one draw."""
    return request.param
