"""Importance-sampling floor series and union-bound terms on the FER panel.

``ldpcmarg floor --json`` files carry, per decoder and Eb/N0, an
importance-sampling FER estimate with its interval, whether that interval is
trustworthy (enough Kish effective hits), and the union-bound terms of the
lightest codewords and of the lightest error structures the search found
(:func:`ldpcmarg.commands.floor.union_terms`). This module turns such a file
into plain data (:class:`FloorSeries`, :class:`UnionTerm`) and draws it into
the FER panel of :func:`ldpcmarg.plots.curves.plot_curves`, which calls it from
one hook:

* each (decoder, code) series is drawn in the decoder's colour and marker
  (:func:`ldpcmarg.plots.style.style_map`, the same as its plain Monte Carlo
  curve) but dashed, with interval bars, labelled
  ``"<decoder> (importance sampling)"``;
* an untrustworthy point never shows an estimate: only its upper bound is
  drawn, as a hollow marker with a downward caret, and the dashed line breaks
  there; a legend entry says so;
* optional union-bound terms ``A_w Q(sqrt(2 w R Eb/N0))`` (union bound,
  e.g. Lin & Costello, *Error Control Coding*; for pseudo-codewords ``w`` is the
  AWGN pseudo-weight) are drawn as thin lines over the figure's x range,
  labelled with the weight and the multiplicity, where they are below 1.

The floor command estimates FER only; there is no BER to draw.
No matplotlib at import time.
"""

from __future__ import annotations

import json
import math
import os
from dataclasses import dataclass, field

import numpy as np

from ..errors import InputError

__all__ = ["FloorSeries", "UnionTerm", "is_floor_document", "is_floor_file",
           "floor_series_from_document", "floor_series_from_file", "union_terms_of",
           "series_label", "union_term_label", "floor_y_lows", "draw_floor_series",
           "draw_union_terms", "untrustworthy_handle", "IS_LABEL", "FER_ONLY_MESSAGE"]

#: Suffix of every importance-sampling legend label.
IS_LABEL = "importance sampling"
#: The one sentence for anyone who asks a floor file for BER.
FER_ONLY_MESSAGE = ("floor --json files carry frame error rates only (the floor command does "
                    "not estimate BER); draw them with --metric fer or both.")

#: Dash patterns of importance-sampling series, one per code in the figure.
IS_DASHES = ((0, (5, 2.5)), (0, (9, 3)), (0, (3, 1.5)))
#: Thin dotted line of the union-bound terms.
UNION_LINESTYLE = (0, (1, 1.5))
UNION_CODEWORD_COLOR = "0.35"

_WEIGHT_SYMBOL = {"pseudo-codewords": "w_p", "trapping-sets": "w_eff", "codewords": "w"}
_SOURCE_TEXT = {"trapping-sets": "trapping sets"}


@dataclass
class UnionTerm:
    """One union-bound term ``A_w Q(sqrt(2 w R Eb/N0))`` recorded in a floor file.

    Attributes
    ----------
    source : {"codewords", "trapping-sets", "pseudo-codewords"}
        The lightest codewords of the code, or a decoder's lightest error structures.
    weight : float
        Hamming weight, AWGN pseudo-weight or effective weight ``|mu|**2``.
    multiplicity : int
        ``A_w``: all words of that weight when ``complete``, else the number found.
    complete : bool
        True when the multiplicity is the code's (exhaustive enumeration).
    rate : float
        Code rate k/n.
    code : str
    decoder : str
        The decoder whose structures these are ("" for codewords).
    recorded : dict of float to float
        The term's value at the Eb/N0 points (dB) of the file, as the floor command wrote it.
    """

    source: str
    weight: float
    multiplicity: int
    complete: bool
    rate: float
    code: str = ""
    decoder: str = ""
    recorded: dict = field(default_factory=dict)

    def fer(self, ebn0_db) -> np.ndarray:
        """``A_w Q(sqrt(2 w R Eb/N0))`` at ``ebn0_db`` (dB), Eb/N0 per information bit."""
        from scipy.special import ndtr

        g = 10.0 ** (np.asarray(ebn0_db, dtype=np.float64) / 10.0)
        return self.multiplicity * ndtr(-np.sqrt(2.0 * self.weight * self.rate * g))

    @property
    def key(self) -> tuple:
        return (self.code, self.source, self.decoder, round(self.weight, 6), self.multiplicity,
                round(self.rate, 9))


@dataclass
class FloorSeries:
    """Importance-sampling FER of one decoder on one code against Eb/N0.

    Attributes
    ----------
    decoder : str
        Canonical decoder spec (keys the colour and marker).
    code : str
    n, k : int or None
    rate : float
    x : ndarray of shape (P,), float64
        Eb/N0 in dB, increasing.
    fer : ndarray of shape (P,), float64
        Estimates (not to be shown where ``trustworthy`` is False).
    fer_ci : ndarray of shape (P, 2), float64
        Interval; ``[0, upper bound]`` at untrustworthy points.
    trustworthy : ndarray of shape (P,), bool
    upper : ndarray of shape (P,), float64
        Upper end of the interval (the only figure shown at untrustworthy points).
    effective_hits : ndarray of shape (P,), float64
    confidence : float
    min_effective_hits : float or None
        The trust threshold the file was written with.
    union : list of UnionTerm
    x_kind : str
        Always ``"ebn0_db"`` (the floor command runs BPSK-AWGN).
    """

    decoder: str
    code: str
    n: int | None
    k: int | None
    rate: float
    x: np.ndarray
    fer: np.ndarray
    fer_ci: np.ndarray
    trustworthy: np.ndarray
    upper: np.ndarray
    effective_hits: np.ndarray
    confidence: float = 0.95
    min_effective_hits: float | None = None
    union: list = field(default_factory=list)
    x_kind: str = "ebn0_db"


def is_floor_document(doc) -> bool:
    """True for a parsed ``floor --json`` document (method "importance-sampling")."""
    if not isinstance(doc, dict):
        return False
    if doc.get("method") == "importance-sampling":
        return True
    pts = doc.get("points")
    return (isinstance(pts, list) and bool(pts)
            and all(isinstance(p, dict) and p.get("method") == "importance-sampling"
                    for p in pts))


def is_floor_file(path) -> bool:
    """True when ``path`` is a readable JSON file written by ``ldpcmarg floor --json``."""
    path = os.fspath(path)
    if not os.path.isfile(path):
        return False
    try:
        with open(path, "rb") as fh:
            if fh.read(16) == b"SQLite format 3\x00":
                return False
        with open(path, encoding="utf-8") as fh:
            text = fh.read()
        if not text.lstrip().startswith("{"):
            return False
        return is_floor_document(json.loads(text))
    except (UnicodeDecodeError, ValueError):
        return False


def _union_of_point(p: dict, code: str, rate: float) -> list[UnionTerm]:
    out = []
    ub = p.get("union_bound") or {}
    x = float(p["ebn0_db"])
    cw = ub.get("codewords")
    if cw:
        out.append(UnionTerm("codewords", float(cw["weight"]), int(cw["multiplicity"]),
                             bool(cw.get("multiplicity_complete", False)), rate, code, "",
                             {x: float(cw["fer"])}))
    ls = ub.get("lightest_structures")
    family = (p.get("structures") or {}).get("family", "")
    # for ml/exact the structures are the codewords again: the codeword term covers them
    if ls and family != "codewords":
        out.append(UnionTerm(family or "structures", float(ls["effective_weight"]),
                             int(ls["count"]), False, rate, code, str(p["decoder"]),
                             {x: float(ls["fer"])}))
    return out


def floor_series_from_document(doc: dict, source: str = "") -> list[FloorSeries]:
    """Series of a parsed ``floor --json`` document, one per decoder, in file order.

    Raises
    ------
    InputError
        When the document lacks a field the figure needs.
    """
    where = f"{source!r} " if source else ""
    try:
        code = doc["code"]
        n = code.get("n")
        k = code.get("k")
        rate = float(code.get("rate", k / n if n and k is not None else float("nan")))
        if not rate > 0:
            raise ValueError("no code rate")
        name = str(code.get("name", ""))
        conf_default = float((doc.get("settings") or {}).get("confidence", 0.95))
        min_eff = (doc.get("settings") or {}).get("min_effective_hits")
        groups: dict[str, list[dict]] = {}
        for p in doc["points"]:
            if int(p.get("frames", 1)) == 0:
                continue
            groups.setdefault(str(p["decoder"]), []).append(p)
        out = []
        for decoder, ps in groups.items():
            ps = sorted(ps, key=lambda p: float(p["ebn0_db"]))
            ci = np.array([[float(v) for v in p["fer_ci"]] for p in ps],
                          dtype=np.float64).reshape(-1, 2)
            trust = np.array([bool(p["trustworthy"]) for p in ps], dtype=bool)
            upper = ci[:, 1].copy()
            terms: dict[tuple, UnionTerm] = {}
            for p in ps:
                for t in _union_of_point(p, name, rate):
                    if t.key in terms:
                        terms[t.key].recorded.update(t.recorded)
                    else:
                        terms[t.key] = t
            out.append(FloorSeries(
                decoder=decoder, code=name, n=None if n is None else int(n),
                k=None if k is None else int(k), rate=rate,
                x=np.array([float(p["ebn0_db"]) for p in ps], dtype=np.float64),
                fer=np.array([float(p["fer"]) for p in ps], dtype=np.float64),
                fer_ci=ci, trustworthy=trust, upper=upper,
                effective_hits=np.array([float(p.get("effective_hits", np.nan)) for p in ps],
                                        dtype=np.float64),
                confidence=float(ps[0].get("confidence", conf_default)),
                min_effective_hits=None if min_eff is None else float(min_eff),
                union=list(terms.values())))
    except (KeyError, TypeError, ValueError, AttributeError) as exc:
        raise InputError(f"{where}is not a complete floor --json file (missing or bad "
                         f"{exc}); write it again with 'ldpcmarg floor ... --json FILE'.") from exc
    if not out:
        raise InputError(f"{where}has no importance-sampling points with frames.")
    return out


def floor_series_from_file(path) -> list[FloorSeries]:
    """Series of a ``floor --json`` file (see :func:`floor_series_from_document`)."""
    path = os.fspath(path)
    if not os.path.isfile(path):
        raise InputError(f"No such results file: {path!r}.")
    try:
        with open(path, encoding="utf-8") as fh:
            doc = json.load(fh)
    except (UnicodeDecodeError, ValueError) as exc:
        raise InputError(f"{path!r} is not a JSON file ({exc}).") from exc
    if not is_floor_document(doc):
        raise InputError(f"{path!r} is not a floor --json file (no importance-sampling points).")
    return floor_series_from_document(doc, path)


def union_terms_of(series) -> list[UnionTerm]:
    """The distinct union-bound terms of ``series`` (a code's codeword term once)."""
    terms: dict[tuple, UnionTerm] = {}
    for s in series:
        for t in s.union:
            key = t.key
            if key in terms:
                terms[key].recorded.update(t.recorded)
            else:
                terms[key] = UnionTerm(t.source, t.weight, t.multiplicity, t.complete, t.rate,
                                       t.code, t.decoder, dict(t.recorded))
    return list(terms.values())


def series_label(s: FloorSeries, one_code: bool) -> str:
    """``"<decoder> (importance sampling)"``, with the code name first in multi-code figures."""
    head = s.decoder if one_code or not s.code else f"{s.code}: {s.decoder}"
    return f"{head} ({IS_LABEL})"


def _fmt_weight(w: float) -> str:
    return f"{int(round(w))}" if abs(w - round(w)) < 1e-9 else f"{w:.3g}"


def union_term_label(t: UnionTerm, one_code: bool) -> str:
    """Legend text naming the term's weight and multiplicity (and whether it is complete).

    >>> union_term_label(UnionTerm("codewords", 8.0, 759, True, 0.5, "golay"), True)
    'union-bound term, codewords: w=8, A_w=759'
    >>> union_term_label(UnionTerm("pseudo-codewords", 16.406, 2, False, 0.41, "t", "lp"), True)
    'union-bound term, lp pseudo-codewords: w_p=16.4, 2 found'
    """
    code = "" if one_code or not t.code else f"{t.code} "
    sym = _WEIGHT_SYMBOL.get(t.source, "w")
    w = _fmt_weight(t.weight)
    if t.source == "codewords":
        if t.complete:
            return f"union-bound term, {code}codewords: w={w}, A_w={t.multiplicity}"
        return (f"union-bound term, {code}lightest codewords found: w={w}, "
                f"{t.multiplicity} found")
    what = _SOURCE_TEXT.get(t.source, t.source)
    return f"union-bound term, {code}{t.decoder} {what}: {sym}={w}, {t.multiplicity} found"


def floor_y_lows(series) -> list[float]:
    """Lowest value each series puts on the FER axis (for the y limits)."""
    lows = []
    for s in series:
        t = s.trustworthy & (s.fer > 0)
        if t.any():
            lo = s.fer_ci[t, 0]
            lo = np.where(lo > 0, lo, s.fer[t])
            lows.append(float(np.min(lo)))
        u = ~s.trustworthy & (s.upper > 0)
        if u.any():
            lows.append(float(np.min(s.upper[u])) / 4.0)  # room for the caret below
    return lows


def _x_on_axis(x: np.ndarray, rate: float, axis_kind: str) -> np.ndarray:
    # Es/N0 (dB) = Eb/N0 (dB) + 10 log10 R
    return x + 10.0 * math.log10(rate) if axis_kind == "esn0_db" else x


def draw_floor_series(ax, series, styles: dict, axis_kind: str, one_code: bool) -> bool:
    """Draw each series dashed with interval bars; untrustworthy points as upper bounds only.

    Parameters
    ----------
    ax : matplotlib Axes (the FER panel)
    series : list of FloorSeries
    styles : dict of str to dict
        Decoder spec -> ``{"color", "marker"}`` (:func:`ldpcmarg.plots.style.style_map`).
    axis_kind : {"ebn0_db", "esn0_db"}
    one_code : bool
        All curves of the figure are of one code (labels then omit the code).

    Returns
    -------
    bool
        True when some point was untrustworthy (the caller adds the legend entry).
    """
    codes = list(dict.fromkeys(s.code for s in series))
    any_untrusted = False
    for s in series:
        st = styles[s.decoder]
        dashes = IS_DASHES[codes.index(s.code) % len(IS_DASHES)]
        x = _x_on_axis(s.x, s.rate, axis_kind)
        good = s.trustworthy & (s.fer > 0)
        # NaN breaks the dashed line at every point that has no trustworthy estimate
        y = np.where(good, s.fer, np.nan)
        lo = np.where(good, np.maximum(s.fer - s.fer_ci[:, 0], 0.0), np.nan)
        hi = np.where(good, np.maximum(s.fer_ci[:, 1] - s.fer, 0.0), np.nan)
        label = series_label(s, one_code)
        if good.any():
            ax.errorbar(x, y, yerr=np.vstack([lo, hi]), ls=dashes, lw=1.3, ms=5, capsize=3,
                        label=label, **st)
        else:
            ax.plot([], [], ls=dashes, lw=1.3, ms=5, label=label, **st)
        bad = ~good
        if bad.any():
            any_untrusted = True
            _draw_upper_bounds(ax, x[bad], s.upper[bad], st)
    return any_untrusted


def _draw_upper_bounds(ax, x, upper, st) -> None:
    # an upper bound only: hollow marker at the bound, a stem down to a caret
    for xi, ui in zip(x, upper, strict=True):
        ax.plot([xi, xi], [ui, ui / 3.0], color=st["color"], lw=1.0)
    ax.plot(x, upper / 3.0, ls="none", marker=7, color=st["color"], ms=5)  # CARETDOWN
    ax.plot(x, upper, ls="none", marker=st["marker"], color=st["color"], mfc="white",
            ms=6, mew=1.3)


def untrustworthy_handle(series):
    """Legend handle and text of the untrustworthy-point symbol."""
    from matplotlib.lines import Line2D

    mins = {s.min_effective_hits for s in series if s.min_effective_hits is not None}
    need = f"< {min(mins):g} effective hits" if len(mins) == 1 else "too few effective hits"
    conf = series[0].confidence if series else 0.95
    marker = Line2D([], [], ls="none", marker="o", mfc="white", color="0.3", ms=6, mew=1.3)
    caret = Line2D([], [], ls="none", marker=7, color="0.3", ms=5)
    # two lines: one would be wider than a single-panel figure
    text = (f"hollow marker with caret: importance sampling not trustworthy\n"
            f"({need}); only the upper bound ({100 * conf:g} %) is drawn")
    return (marker, caret), text


def draw_union_terms(ax, terms, styles: dict, axis_kind: str, x_left: float, x_right: float,
                     one_code: bool, points: int = 200) -> None:
    """Thin dotted lines ``A_w Q(sqrt(2 w R Eb/N0))`` over the x range, where below 1.

    Codeword terms are grey; a decoder's structure term takes the decoder's colour.
    """
    grid = np.linspace(float(x_left), float(x_right), int(points))
    for t in terms:
        ebn0 = grid - 10.0 * math.log10(t.rate) if axis_kind == "esn0_db" else grid
        y = t.fer(ebn0)
        ok = np.isfinite(y) & (y > 0) & (y <= 1.0)  # above 1 the bound says nothing
        if not ok.any():
            continue
        color = styles[t.decoder]["color"] if t.decoder in styles else UNION_CODEWORD_COLOR
        ax.plot(grid[ok], y[ok], ls=UNION_LINESTYLE, lw=0.9, color=color,
                label=union_term_label(t, one_code))
