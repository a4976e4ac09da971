"""What a BER/FER figure says about the link: title or legend text and the right limit line.

Results of a link other than plain BPSK (a constellation, fading, rate
matching, a quantiser or an interleaver) carry a *link record*: the fields of
the JSON ``channel`` object of ``simulate --json`` (``modulation``,
``demapper``, ``fading_spec``, ``block``, ``puncture``, ``shorten``,
``quantize``, ``transmitted_rate``, ...), also kept in the results store per
run. From it a figure

* names the link -- modulation (and max-log), fading, transmitted rate,
  puncturing/shortening and quantiser -- in the title when every curve shares
  one link, else after each curve's label;
* never draws the binary-input AWGN Shannon limit for such curves: it draws
  the BICM limit of the constellation at the transmitted rate
  (:func:`ldpcmarg.analysis.bicm_capacity.bicm_shannon_limit_ebn0_db`, AWGN
  or ergodic fast fading) and, for block fading or a user constellation file
  that cannot be read, leaves the line out and says why.
"""

from __future__ import annotations

import hashlib
import math

import numpy as np

__all__ = ["link_from_channel", "link_from_store", "link_from_csv_row", "link_text",
           "describe_links", "link_limit_lines", "LinkFigure", "link_figure"]

_LINK_KEYS = ("modulation", "demapper", "bits_per_symbol", "fading", "fading_spec", "block",
              "puncture", "shorten", "quantize", "interleaver", "transmitted_rate")


def _is_plain(rec: dict) -> bool:
    return (rec.get("modulation", "bpsk") == "bpsk" and rec.get("demapper", "exact") == "exact"
            and rec.get("fading", "none") == "none" and not rec.get("puncture")
            and not rec.get("shorten") and not rec.get("quantize")
            and rec.get("interleaver") is None)


def link_from_channel(channel: dict | None) -> dict | None:
    """The link record of a JSON ``channel`` object; None for plain BPSK or no link fields."""
    if not channel or "modulation" not in channel:
        return None
    rec = {k: channel.get(k) for k in _LINK_KEYS}
    return None if _is_plain(rec) else rec


def link_from_csv_row(row: dict) -> dict | None:
    """The link record of a ``simulate --csv`` row (columns written since the link columns)."""
    if not row.get("modulation"):
        return None
    spec = row.get("fading") or "none"
    block = 1
    for part in spec.partition(":")[2].split(","):
        if part.startswith("block="):
            block = int(part[6:])

    def num(key, cast):
        v = row.get(key)
        return cast(v) if v not in (None, "") else None

    rec = {"modulation": row["modulation"], "demapper": row.get("demapper") or "exact",
           "fading": spec.partition(":")[0], "fading_spec": spec, "block": block,
           "puncture": num("puncture", int), "shorten": num("shorten", int),
           "quantize": row.get("quantize") or None, "interleaver": num("interleaver", int),
           "transmitted_rate": num("transmitted_rate", float)}
    return None if _is_plain(rec) else rec


def link_from_store(settings: dict, payload: dict | None, n: int, k: int) -> dict | None:
    """The link record of a stored run: the saved record, else what the settings tell.

    Runs stored before the record was kept give modulation, demapper and
    fading; their transmitted rate is known only without rate matching.
    """
    if payload:
        return link_from_channel(payload)
    link = settings.get("link")
    if not link:
        return None
    empty = hashlib.sha256(np.zeros(0, dtype=np.int64).tobytes()).hexdigest()[:16]
    fad = link.get("fading") or {}
    rec = {"modulation": link.get("modulation", "bpsk"), "demapper": link.get("demapper"),
           "fading": fad.get("kind", "none"), "block": fad.get("block", 1),
           "fading_spec": fad.get("kind", "none"),
           "quantize": None if not link.get("quantize") else
           "q={q}".format(**link["quantize"]), "interleaver": link.get("interleaver"),
           "puncture": None if link.get("puncture") == empty else "?",
           "shorten": None if link.get("shorten") == empty else "?"}
    if fad.get("kind") == "rician":
        rec["fading_spec"] = f"rician:K={fad.get('K'):g}"
    if fad.get("kind") == "erasure":
        rec["fading_spec"] = f"erasure:p={fad.get('p'):g}"
    if fad.get("block", 1) != 1:
        rec["fading_spec"] += ("," if ":" in rec["fading_spec"] else ":") + \
            f"block={fad['block']}"
    rec["bits_per_symbol"] = {"bpsk": 1, "qpsk": 2, "8psk": 3, "qam16": 4, "qam64": 6,
                              "qam256": 8}.get(rec["modulation"])
    rec["transmitted_rate"] = k / n if rec["puncture"] is None and rec["shorten"] is None \
        else None
    return None if _is_plain(rec) else rec


def link_text(rec: dict) -> str:
    """Short description: ``qam16 max-log, rayleigh:block=8, punct 20, q=5, R_t=0.6``."""
    parts = [str(rec.get("modulation")) + (" max-log" if rec.get("demapper") == "maxlog" else "")]
    if rec.get("fading") not in (None, "none"):
        parts.append(str(rec.get("fading_spec") or rec.get("fading")))
    if rec.get("puncture"):
        parts.append(f"punct {rec['puncture']}")
    if rec.get("shorten"):
        parts.append(f"short {rec['shorten']}")
    if rec.get("quantize"):
        parts.append(str(rec["quantize"]))
    if rec.get("interleaver") is not None:
        parts.append("interleaved")
    r = rec.get("transmitted_rate")
    parts.append(f"R_t={r:.4g}" if r else "R_t unknown")
    return ", ".join(parts)


def describe_links(curves) -> tuple[str | None, list[str]]:
    """(title text or None, legend labels): one link for all curves goes in the title."""
    recs = [getattr(c, "link", None) for c in curves]
    labels = [c.label for c in curves]
    if not any(recs):
        return None, labels
    texts = [link_text(r) if r else "bpsk" for r in recs]
    if len(set(texts)) == 1:
        return "link: " + texts[0], labels
    return None, [f"{lab} [{t}]" for lab, t in zip(labels, texts, strict=True)]


def _limit(rec: dict) -> tuple[float | None, str]:
    from ..analysis.bicm_capacity import bicm_shannon_limit_ebn0_db, link_limit_note
    from ..errors import InputError
    from ..link.fading import parse_fading
    from ..link.modulation import make_constellation

    rate = rec.get("transmitted_rate")
    name = str(rec.get("modulation"))
    if not rate:
        return None, f"no Shannon limit drawn for {name}: the transmitted rate is unknown"
    try:
        fading = parse_fading(rec.get("fading_spec") or "none")
    except InputError:
        return None, f"no Shannon limit drawn: unknown fading {rec.get('fading_spec')!r}"
    note = link_limit_note(fading)
    if note:
        return None, note
    try:
        const = make_constellation(name)
        x = bicm_shannon_limit_ebn0_db(const, float(rate), fading=fading)
    except InputError as exc:
        return None, f"no Shannon limit drawn for {name}: {exc}"
    what = name + ("" if not fading.active else f", {fading.label()}")
    return x, f"BICM limit {what}, R_t={float(rate):.3g}"


def link_limit_lines(curves) -> tuple[dict, list[str]]:
    """Limit lines {label: Eb/N0 dB} for the link curves and notes on lines left out."""
    lines, notes, seen = {}, [], set()
    for c in curves:
        rec = getattr(c, "link", None)
        if not rec:
            continue
        key = (rec.get("modulation"), rec.get("fading_spec"), rec.get("transmitted_rate"))
        if key in seen:
            continue
        seen.add(key)
        x, text = _limit(rec)
        if x is not None and math.isfinite(x):
            lines[text] = x
        elif text not in notes:
            notes.append(text)
    return lines, notes


class LinkFigure:
    """What :func:`ldpcmarg.plots.curves.plot_curves` needs to know about the links.

    Attributes
    ----------
    title : str or None
        Default title text (one shared link), else None.
    labels : list of str
        Legend label of each curve (link appended when the curves differ).
    biawgn_rates : list of float
        Code rates whose binary-input AWGN Shannon limit applies (curves
        without a link only).
    lines : dict of str to float
        BICM limit lines, Eb/N0 in dB.
    notes : list of str
        Limits left out, and why (shown as legend entries).
    """

    def __init__(self, curves, shannon: bool, kind: str):
        self.title, self.labels = describe_links(curves)
        self.biawgn_rates = sorted({round(c.rate, 6) for c in curves
                                    if not getattr(c, "link", None)})
        self.lines, self.notes = ({}, []) if not (shannon and kind == "ebn0_db") else \
            link_limit_lines(curves)


def link_figure(curves, shannon: bool, kind: str) -> LinkFigure:
    """Shorthand for :class:`LinkFigure`."""
    return LinkFigure(curves, shannon, kind)
