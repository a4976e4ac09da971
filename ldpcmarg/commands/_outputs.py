"""One rule for the files every command writes, checked before any work starts.

The rule
--------
- An existing output file is refused unless ``--force`` is given.
- An output may not be the same file as the results store (or its SQLite
  companions ``-wal``, ``-shm``, ``.lock``), an input of the command, or another
  output of the same command, even with ``--force``. "Same" is judged on the
  resolved path (``realpath``, so symbolic links count) and, for files that
  exist, on the file itself (``os.path.samefile``, so hard links count).
- The folder of an output must exist: nothing creates missing folders
  silently (a directory output such as ``compare --plots`` may itself be
  new, but its parent must exist).
- An output that is a dangling symbolic link, a directory or not a regular
  file is refused.
- Every output must be writable: an existing file is opened for writing
  (without truncating it), a new one is created and removed again. A
  read-only target therefore fails at once, before anything is computed.

Each problem raises :class:`~ldpcmarg.errors.InputError` with one sentence
naming the file and the option. Commands build one :class:`Outputs`, add
their files and inputs, and call :meth:`Outputs.check` before loading data
or starting a sweep.
"""

from __future__ import annotations

import errno
import os
import stat
from pathlib import Path

from ..errors import InputError

__all__ = ["Outputs", "STORE_COMPANIONS"]

#: Files SQLite and the store keep beside a store ``s.sqlite``.
STORE_COMPANIONS = ("-wal", "-shm", "-journal", ".lock")


class Outputs:
    """The output files of one command invocation.

    Parameters
    ----------
    force : bool
        The command's ``--force`` flag: existing output files may be replaced.

    Examples
    --------
    >>> outs = Outputs(force=False)
    >>> outs.protect("/nonexistent/dir/s.sqlite", "the store --store", store=True)
    >>> outs.add("/nonexistent/dir/s.sqlite", "--json")
    >>> try:
    ...     outs.check()
    ... except Exception as exc:
    ...     print(exc)
    --json /nonexistent/dir/s.sqlite is the same file as the store --store; give another path.
    """

    def __init__(self, force: bool = False):
        self.force = bool(force)
        self._files: list[tuple[str, str]] = []  # (label, path)
        self._dirs: list[tuple[str, str, str]] = []  # (label, path, glob of files written)
        self._protected: list[tuple[str, str]] = []

    # ------------------------------------------------------------ collecting
    def add(self, path, option: str) -> None:
        """Register an output file written by ``option`` (None is ignored)."""
        if path is not None:
            self._files.append((option, os.fspath(path)))

    def add_dir(self, path, option: str, pattern: str) -> None:
        """Register an output folder whose files match ``pattern`` (e.g. ``compare_*.png``)."""
        if path is not None:
            self._dirs.append((option, os.fspath(path), pattern))

    def protect(self, path, label: str, *, store: bool = False) -> None:
        """A file no output may replace: an input or the store (``store=True`` adds
        its SQLite companions)."""
        if path is None:
            return
        p = os.fspath(path)
        self._protected.append((label, p))
        if store:
            for suffix in STORE_COMPANIONS:
                self._protected.append((f"{label} ({suffix} file)", p + suffix))

    def protect_if_file(self, path, label: str) -> None:
        """Protect ``path`` when it names an existing file (a code given by name is not one)."""
        if path is not None and os.path.isfile(os.fspath(path)):
            self.protect(path, label)

    # ------------------------------------------------------------ checking
    def check(self) -> None:
        """Apply the rule to every registered output; raise InputError on the first problem."""
        seen: list[tuple[str, str]] = list(self._protected)
        for option, path in self._files:
            self._check_file(option, path, seen)
            seen.append((option, path))
        for option, path, pattern in self._dirs:
            self._check_dir(option, path, pattern, seen)

    def _check_file(self, option: str, path: str, seen) -> None:
        what = f"{option} {path}"
        if os.path.islink(path) and not os.path.exists(path):
            raise InputError(f"{what} is a symbolic link to a missing file "
                             f"({os.readlink(path)}); remove the link or give another path.")
        if os.path.isdir(path):
            raise InputError(f"{what} is a directory; give a file name.")
        for label, other in seen:
            if _same_file(path, other):
                raise InputError(f"{what} is the same file as {label}; give another path.")
        parent = os.path.dirname(os.path.abspath(path))
        if not os.path.isdir(parent):
            raise InputError(f"The folder {parent} of {what} does not exist; create it first.")
        if os.path.lexists(path):
            if not self.force:
                raise InputError(f"Output file {path} ({option}) exists; pass --force to "
                                 "overwrite it.")
            mode = os.stat(path).st_mode
            if not stat.S_ISREG(mode) and os.path.realpath(path) != os.devnull:
                raise InputError(f"{what} is not a regular file; give another path.")
            _probe_existing(what, path)
        else:
            _probe_new(what, path)

    def _check_dir(self, option: str, path: str, pattern: str, seen) -> None:
        what = f"{option} {path}"
        if os.path.islink(path) and not os.path.exists(path):
            raise InputError(f"{what} is a symbolic link to a missing folder "
                             f"({os.readlink(path)}); remove the link or give another path.")
        if os.path.exists(path) and not os.path.isdir(path):
            raise InputError(f"{what} exists and is not a folder; give a folder name.")
        for label, other in seen:
            if _same_file(path, other):
                raise InputError(f"{what} is the same path as {label}; give another path.")
        parent = os.path.dirname(os.path.abspath(path))
        if not os.path.isdir(parent):
            raise InputError(f"The folder {parent} of {what} does not exist; create it first.")
        if os.path.isdir(path):
            old = sorted(Path(path).glob(pattern))
            if old and not self.force:
                raise InputError(f"Output file {old[0]} ({option}) exists; pass --force to "
                                 "overwrite it.")
            for f in old:
                for label, other in seen:
                    if _same_file(os.fspath(f), other):
                        raise InputError(f"{option} would overwrite {f}, the same file as "
                                         f"{label}; give another folder.")
            _probe_new(what, os.path.join(path, ".ldpcmarg-write-probe"))
        else:
            _probe_new_dir(what, path)


def _same_file(a: str, b: str) -> bool:
    """Same resolved path, or (both existing) the same inode (hard links)."""
    if os.path.realpath(a) == os.path.realpath(b):
        return True
    try:
        return os.path.samefile(a, b)
    except OSError:
        return False


def _reason(exc: OSError) -> str:
    return exc.strerror or errno.errorcode.get(exc.errno or 0, str(exc))


def _probe_existing(what: str, path: str) -> None:
    try:
        fd = os.open(path, os.O_WRONLY | os.O_NONBLOCK)
    except OSError as exc:
        raise InputError(f"Cannot write {what}: {_reason(exc)}.") from None
    os.close(fd)


def _probe_new(what: str, path: str) -> None:
    try:
        fd = os.open(path, os.O_WRONLY | os.O_CREAT | os.O_EXCL, 0o644)
    except OSError as exc:
        raise InputError(f"Cannot write {what}: {_reason(exc)}.") from None
    os.close(fd)
    os.unlink(path)


def _probe_new_dir(what: str, path: str) -> None:
    try:
        os.mkdir(path)
    except OSError as exc:
        raise InputError(f"Cannot create {what}: {_reason(exc)}.") from None
    os.rmdir(path)
