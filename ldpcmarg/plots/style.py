"""Figure styles and labels that do not need matplotlib: decoder styles, legend texts, titles.

* :func:`decoder_style` gives every decoder spec the same colour and marker
  in every figure and panel: a fixed slot for each registered decoder name
  (the table below, never reordered), a hash-chosen slot for specs with
  options; :func:`style_map` resolves the rare collisions inside one figure.
* :func:`reference_label` writes a value with its unit once
  ("Shannon limit R=0.5 (0.187 dB)").
* :func:`default_title` names code, n, k, channel and iteration cap.
"""

from __future__ import annotations

import zlib

from .._text import plural

__all__ = ["COLORS", "MARKERS", "decoder_style", "style_map", "reference_label",
           "format_x_value", "iteration_cap", "default_title", "LINESTYLES", "X_UNITS"]

#: Colour cycle (matplotlib's "tab10" hex values, written out so styles never
#: depend on a user's rc settings).
COLORS = ("#1f77b4", "#ff7f0e", "#2ca02c", "#d62728", "#9467bd", "#8c564b", "#e377c2",
          "#7f7f7f", "#bcbd22", "#17becf")
#: Fillable markers only: zero-error points are drawn hollow in the same marker.
MARKERS = ("o", "s", "^", "D", "v", "P", "X", "h", "<", ">", "p", "*")
#: Line styles that tell codes (or runs) apart when one decoder appears several times.
LINESTYLES = ("-", "--", "-.", ":")
#: 60 distinct (colour, marker) pairs: slot s -> (COLORS[s % 10], MARKERS[s % 12])
#: is one-to-one for s < lcm(10, 12).
_SLOTS = 60

# Fixed slots of the registered decoder names (append new names; never reorder).
_FIXED = ("sum-product", "min-sum", "layered-sum-product", "offset-min-sum", "lp",
          "layered-min-sum", "fw", "ml", "reweighted-sum-product", "exact", "bit-flipping",
          "gallager-a", "gallager-b", "hard-decision", "osd", "fixed-min-sum",
          "fixed-offset-min-sum", "fixed-layered-min-sum", "fixed-layered-offset-min-sum")

#: Axis units per x kind (for legend values).
X_UNITS = {"ebn0_db": "dB", "esn0_db": "dB", "p": "", "epsilon": ""}


def _slot(spec: str) -> int:
    if spec in _FIXED:
        return _FIXED.index(spec)
    # options or an unknown name: a stable hash (crc32 does not vary between runs,
    # unlike Python's hash of str) into the slots after the fixed ones
    free = _SLOTS - len(_FIXED)
    return len(_FIXED) + zlib.crc32(spec.encode("utf-8")) % free


def _slot_style(slot: int) -> dict:
    return {"color": COLORS[slot % len(COLORS)], "marker": MARKERS[slot % len(MARKERS)]}


def decoder_style(spec: str) -> dict:
    """Colour and marker of a decoder spec, the same in every figure.

    Parameters
    ----------
    spec : str
        Canonical decoder spec (``"min-sum:alpha=0.75"``).

    Returns
    -------
    dict with keys ``color`` (hex string) and ``marker`` (matplotlib marker code)
    """
    return _slot_style(_slot(str(spec)))


def style_map(specs) -> dict[str, dict]:
    """Styles for the decoders of one figure: :func:`decoder_style`, collisions moved on.

    A spec keeps its own style unless an earlier spec (registered names first,
    then in sorted order) already holds that slot; then it takes the next free
    slot. Up to 60 specs of one figure thus get distinct colour-marker pairs.
    """
    uniq = sorted(set(map(str, specs)), key=lambda s: (s not in _FIXED, s))
    taken: set[int] = set()
    out = {}
    for s in uniq:
        slot = _slot(s)
        while slot in taken and len(taken) < _SLOTS:  # beyond 60 specs styles repeat
            slot = (slot + 1) % _SLOTS
        taken.add(slot)
        out[s] = _slot_style(slot)
    return out


def format_x_value(value: float, kind: str) -> str:
    """A channel-parameter value with its unit: ``"1.10 dB"``, ``"p = 0.110"``."""
    v = float(value)
    if kind in ("ebn0_db", "esn0_db"):
        return f"{v:.3g} dB" if abs(v) < 0.995 else f"{v:.2f} dB"
    name = {"p": "p", "epsilon": "eps"}.get(kind, "x")
    return f"{name} = {v:.3g}"


def reference_label(label: str, value: float, kind: str) -> str:
    """Legend text of a vertical reference line: the label, then the value with its unit once.

    >>> reference_label("Shannon limit R=0.5", 0.1871, "ebn0_db")
    'Shannon limit R=0.5 (0.187 dB)'
    >>> reference_label("BP threshold mycode", 1.1036, "ebn0_db")
    'BP threshold mycode (1.10 dB)'
    """
    return f"{label} ({format_x_value(value, kind)})"


def iteration_cap(spec: str) -> int | None:
    """The iteration cap ``max_iter`` of a decoder spec (given or the registry default).

    None for decoders without one (LP, ML, exact, no decoding) or unknown names.
    """
    from ..decoders.base import decoder_class, parse_decoder_spec
    from ..errors import InputError

    try:
        name, opts = parse_decoder_spec(spec)
        cls = decoder_class(name)
    except InputError:
        return None
    if "max_iter" in opts:
        try:
            return int(opts["max_iter"])
        except (TypeError, ValueError):
            return None
    p = getattr(cls, "params", {}).get("max_iter")
    return int(p.default) if p is not None and p.default is not None else None


_CHANNELS = {"ebn0_db": "BPSK over AWGN", "esn0_db": "BPSK over AWGN", "p": "BSC",
             "epsilon": "BEC"}


def default_title(codes, x_kind: str, decoders) -> str:
    """Figure title naming the code(s), n, k, the channel and the iteration cap(s).

    Parameters
    ----------
    codes : iterable of (name, n, k)
        Distinct codes in the figure (n, k may be None when unknown).
    x_kind : {"ebn0_db", "esn0_db", "p", "epsilon"}
    decoders : iterable of str
        Decoder specs in the figure.

    Examples
    --------
    >>> default_title([("peg-504-3-6", 504, 252)], "ebn0_db", ["sum-product", "lp"])
    'peg-504-3-6 (n=504, k=252), BPSK over AWGN, at most 50 iterations'
    """
    parts = []
    for name, n, k in dict.fromkeys(tuple(c) for c in codes):
        facts = ", ".join(f"{a}={v}" for a, v in (("n", n), ("k", k)) if v is not None)
        parts.append(f"{name} ({facts})" if facts and name else (name or facts))
    text = "; ".join(p for p in parts if p) or "LDPC code"
    text += f", {_CHANNELS.get(x_kind, x_kind)}"
    caps = {}
    for spec in dict.fromkeys(decoders):
        cap = iteration_cap(spec)
        if cap is not None:
            caps[spec] = cap
    if len(set(caps.values())) == 1:
        text += f", at most {plural(next(iter(caps.values())), 'iteration')}"
    elif caps:
        # the cap most decoders share, then the others by decoder name (short, so
        # the title fits the figure); many different caps: their range
        values = list(caps.values())
        common = max(values, key=values.count)   # ties: the first decoder's
        others = [(spec.partition(":")[0], c) for spec, c in caps.items() if c != common]
        names = [name for name, _ in others]
        if len(others) <= 2 and len(set(names)) == len(names):
            text += f", at most {plural(common, 'iteration')} (" + ", ".join(
                f"{name} {c}" for name, c in others) + ")"
        else:
            text += f", at most {min(values)}-{max(values)} iterations"
    return text
