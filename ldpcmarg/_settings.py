"""Numerical settings kept in one place."""

from __future__ import annotations

#: numba flags for every kernel. ``cache=True`` keeps compile time out of the
#: hot path after the first run; no fastmath (``nnan``/``ninf`` would break
#: saturated LLRs).
NUMBA_OPTS = {"cache": True, "nogil": True}

#: Magnitude of the LLR given to an unerased BEC bit and the clip applied to
#: channel LLRs inside message passing. Large enough to dominate any sum of
#: check messages, small enough that exp/log arithmetic stays finite.
LLR_MAX = 1.0e4

#: Check degree above which local-codeword enumeration (LP oracle, FW) is refused.
DEFAULT_MAX_CHECK_DEGREE = 12
