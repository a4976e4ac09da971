"""Exception hierarchy of ldpcmarg.

Every error the package raises on purpose derives from :class:`LdpcmargError`,
so the command line can turn it into one clear message without a traceback.
Non-convergence of an iterative decoder is *not* an error: it is a normal
returned status (``DecodeResult.valid`` / ``iterations``).
"""

from __future__ import annotations


class LdpcmargError(Exception):
    """Base class of all errors raised deliberately by ldpcmarg."""


class InputError(LdpcmargError, ValueError):
    """Bad user input: malformed file, non-binary matrix, wrong length, NaN LLRs, bad option."""


class CodeFileError(InputError):
    """A parity-check matrix file is missing or malformed (names file, line or entry)."""


class SolverError(LdpcmargError, RuntimeError):
    """An optimisation back end (HiGHS) failed or returned a non-optimal status."""


class StoreError(LdpcmargError):
    """The results store is unusable, locked by another writer, or belongs to other settings."""


class MissingExtraError(LdpcmargError, ImportError):
    """An optional dependency is needed; the message names the extra to install."""


class ResourceError(LdpcmargError, MemoryError):
    """An operation would need more memory than this machine can spare (estimated first)."""


class RunInterrupted(KeyboardInterrupt):
    """Ctrl-C or SIGTERM stopped a command; the message says what was kept and how to go on.

    A :class:`KeyboardInterrupt` (not an :class:`LdpcmargError`): code that
    cleans up on Ctrl-C sees it as one. The command line prints its message as
    the single line of the interruption, with exit status 130.
    """
