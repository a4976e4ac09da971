"""Declarative option checks shared by decoders, channels and the CLI.

A component declares its options as a mapping ``name -> Param``; one helper
validates user values and produces messages such as
``The 'max_iter' option of sum-product must be an integer >= 1; got 0.``
The same declarations describe the options in ``--help`` texts.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Any

from .errors import InputError

__all__ = ["Param", "validate_options", "describe_options", "parse_option_value"]


@dataclass(frozen=True)
class Param:
    """One option of a component.

    Parameters
    ----------
    kind : {"int", "float", "bool", "choice", "str", "any"}
        Value type. ``"any"`` accepts arbitrary Python objects (e.g. arrays)
        and is not settable from the command line.
    default : object
        Default value (``None`` allowed).
    low, high : float, optional
        Inclusive numeric bounds.
    choices : tuple of str, optional
        Accepted values for ``kind="choice"``.
    doc : str
        One-line description with units.
    low_open, high_open : bool
        Make the corresponding bound exclusive.
    """

    kind: str
    default: Any = None
    low: float | None = None
    high: float | None = None
    choices: tuple[str, ...] = ()
    doc: str = ""
    low_open: bool = False
    high_open: bool = False

    def range_text(self) -> str:
        parts = []
        if self.low is not None:
            parts.append(f"{'>' if self.low_open else '>='} {self.low:g}")
        if self.high is not None:
            parts.append(f"{'<' if self.high_open else '<='} {self.high:g}")
        return " and ".join(parts)

    def expectation(self) -> str:
        if self.kind == "choice":
            return "one of " + ", ".join(repr(c) for c in self.choices)
        noun = {"int": "an integer", "float": "a number", "bool": "true or false",
                "str": "a string", "any": "a value"}[self.kind]
        rng = self.range_text()
        return f"{noun} {rng}" if rng else noun


def parse_option_value(text: str) -> Any:
    """Turn a command-line option value (``"0.8"``, ``"true"``, ``"30"``) into Python.

    Numbers become int or float, ``true/false/yes/no`` become bool, anything
    else stays a string; the declared ``Param`` then checks it.
    """
    low = text.strip().lower()
    if low in ("true", "yes", "on"):
        return True
    if low in ("false", "no", "off"):
        return False
    if low in ("none", "null"):
        return None
    try:
        return int(text)
    except ValueError:
        pass
    try:
        return float(text)
    except ValueError:
        return text.strip()


def _check_one(owner: str, name: str, p: Param, value: Any) -> Any:
    def fail() -> InputError:
        return InputError(
            f"The {name!r} option of {owner} must be {p.expectation()}; got {value!r}."
        )

    if value is None:
        if p.default is None:
            return None
        raise fail()
    if p.kind == "any":
        return value
    if p.kind == "bool":
        if isinstance(value, bool):
            return value
        if isinstance(value, str):
            v = parse_option_value(value)
            if isinstance(v, bool):
                return v
        if isinstance(value, int | float) and value in (0, 1):
            return bool(value)
        raise fail()
    if p.kind == "choice":
        if isinstance(value, str) and value in p.choices:
            return value
        raise fail()
    if p.kind == "str":
        if isinstance(value, str):
            return value
        raise fail()
    if isinstance(value, str):
        value = parse_option_value(value)
    if isinstance(value, bool):
        raise fail()
    if p.kind == "int":
        if isinstance(value, float) and value.is_integer():
            value = int(value)
        if not isinstance(value, int | _np_int()):
            raise fail()
        value = int(value)
    elif p.kind == "float":
        if not isinstance(value, int | float | _np_num()):
            raise fail()
        value = float(value)
        if math.isnan(value):
            raise fail()
    else:  # pragma: no cover - declaration error
        raise ValueError(f"unknown Param kind {p.kind!r}")
    if p.low is not None and (value < p.low or (p.low_open and value == p.low)):
        raise fail()
    if p.high is not None and (value > p.high or (p.high_open and value == p.high)):
        raise fail()
    return value


def _np_int():
    import numpy as np

    return np.integer


def _np_num():
    import numpy as np

    return np.number


def validate_options(owner: str, params: dict[str, Param], given: dict[str, Any]) -> dict[str, Any]:
    """Check ``given`` against ``params`` and fill in defaults.

    Parameters
    ----------
    owner : str
        Name used in messages (``"sum-product"``).
    params : dict of str to Param
        Declared options.
    given : dict
        User values; keys with ``-`` are accepted for ``_``.

    Returns
    -------
    dict
        Every declared option with a validated value.

    Raises
    ------
    InputError
        Unknown option (message lists the accepted ones) or bad value.
    """
    out: dict[str, Any] = {}
    normalised = {k.replace("-", "_"): v for k, v in given.items()}
    unknown = sorted(set(normalised) - set(params))
    if unknown:
        accepted = ", ".join(sorted(params)) or "(none)"
        raise InputError(
            f"{owner} has no option {unknown[0]!r}; accepted options: {accepted}."
        )
    for name, p in params.items():
        if name in normalised:
            out[name] = _check_one(owner, name, p, normalised[name])
        else:
            out[name] = p.default
    return out


def describe_options(params: dict[str, Param]) -> str:
    """One line per option: ``name (expectation, default X): doc``."""
    lines = []
    for name, p in params.items():
        lines.append(f"{name} ({p.expectation()}, default {p.default!r}): {p.doc}")
    return "\n".join(lines)
