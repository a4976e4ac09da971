"""Small text helpers shared by command output and figure labels."""

from __future__ import annotations

__all__ = ["plural"]


def plural(count, singular: str, plural_form: str | None = None) -> str:
    """``"1 cycle"``, ``"2 cycles"``: a count with its noun in the right number.

    Parameters
    ----------
    count : int
        The number shown (only an integer equal to 1 takes the singular).
    singular : str
        The noun for one item.
    plural_form : str, optional
        The noun for any other count (default: ``singular + "s"``).

    Examples
    --------
    >>> plural(1, "cycle"), plural(0, "cycle"), plural(3, "matrix", "matrices")
    ('1 cycle', '0 cycles', '3 matrices')
    """
    word = singular if count == 1 else (plural_form or singular + "s")
    return f"{count} {word}"
