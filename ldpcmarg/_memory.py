"""Memory estimates checked before large allocations.

Operations whose memory grows with the declared size of a code (the code
model itself, bit-packed GF(2) elimination) call :func:`require_memory` with
their estimate first, so a file that declares a huge matrix, or a code too
long for dense GF(2) work on this machine, gets one clear
:class:`~ldpcmarg.errors.ResourceError` instead of a ``MemoryError``
traceback (or the machine swapping for minutes).

The budget is :data:`MEMORY_FRACTION` of the memory this process may still
use: the smaller of the memory the kernel reports available
(``MemAvailable`` in ``/proc/meminfo``) and the address-space limit
(``ulimit -v``, ``RLIMIT_AS``) minus what the process already maps. The
environment variable ``LDPCMARG_MEMORY_LIMIT`` (bytes, suffixes ``K``, ``M``,
``G`` allowed) lowers it further, e.g. on a shared machine.
"""

from __future__ import annotations

import os

from .errors import ResourceError

__all__ = ["MEMORY_FRACTION", "memory_budget", "require_memory", "format_bytes"]

#: Fraction of the available memory one operation may plan to use.
MEMORY_FRACTION = 0.5

_SUFFIX = {"": 1, "K": 1 << 10, "M": 1 << 20, "G": 1 << 30, "T": 1 << 40}


def _meminfo_available() -> int | None:
    try:
        with open("/proc/meminfo", encoding="ascii") as fh:
            for line in fh:
                if line.startswith("MemAvailable:"):
                    return int(line.split()[1]) * 1024
    except (OSError, ValueError, IndexError):
        pass
    try:
        return os.sysconf("SC_AVPHYS_PAGES") * os.sysconf("SC_PAGE_SIZE")
    except (ValueError, OSError, AttributeError):  # pragma: no cover - non-POSIX
        return None


def _address_space_left() -> int | None:
    try:
        import resource
    except ImportError:  # pragma: no cover - non-POSIX
        return None
    soft, _ = resource.getrlimit(resource.RLIMIT_AS)
    if soft == resource.RLIM_INFINITY:
        return None
    used = 0
    try:
        with open("/proc/self/status", encoding="ascii") as fh:
            for line in fh:
                if line.startswith("VmSize:"):
                    used = int(line.split()[1]) * 1024
                    break
    except (OSError, ValueError, IndexError):
        pass
    return max(soft - used, 0)


def _env_limit() -> int | None:
    text = os.environ.get("LDPCMARG_MEMORY_LIMIT", "").strip().upper().removesuffix("B")
    if not text:
        return None
    unit = text[-1] if text[-1] in _SUFFIX else ""
    digits = text[:-1] if unit else text
    if not digits.isascii() or not digits.isdigit() or len(digits) > 15:
        raise ResourceError(
            f"LDPCMARG_MEMORY_LIMIT={os.environ['LDPCMARG_MEMORY_LIMIT']!r} is not a byte "
            "count; use e.g. 2G, 512M or 1000000000.")
    return int(digits) * _SUFFIX[unit]


def memory_budget() -> int:
    """Bytes one operation may plan to allocate (see the module docstring)."""
    limits = [v for v in (_meminfo_available(), _address_space_left()) if v is not None]
    budget = int(min(limits) * MEMORY_FRACTION) if limits else 1 << 62
    env = _env_limit()
    if env is not None:
        budget = min(budget, env)
    return budget


def format_bytes(nbytes: float) -> str:
    """``"3.2 GiB"``-style size."""
    value = float(nbytes)
    for unit in ("B", "KiB", "MiB", "GiB", "TiB", "PiB"):
        if value < 1024 or unit == "PiB":
            return f"{value:.0f} {unit}" if unit == "B" else f"{value:.1f} {unit}"
        value /= 1024
    return f"{value:.1f} EiB"  # pragma: no cover


def require_memory(nbytes: float, what: str, fix: str = "") -> None:
    """Raise :class:`ResourceError` if ``nbytes`` exceeds :func:`memory_budget`.

    Parameters
    ----------
    nbytes : float
        Estimated allocation in bytes.
    what : str
        The operation, e.g. ``"GF(2) elimination of a 1000 x 2000 matrix"``.
    fix : str, optional
        A sentence telling the user what to do instead.
    """
    budget = memory_budget()
    if nbytes > budget:
        raise ResourceError(
            f"{what} would need about {format_bytes(nbytes)} of memory, more than the "
            f"{format_bytes(budget)} this machine can spare"
            + (f"; {fix}" if fix else "; use a smaller code or a machine with more memory.")
        )
