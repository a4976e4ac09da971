"""Figures record the link: titles/legends, and the right Shannon limit (or none).

Also the BICM capacity behind the limit line, checked against outside facts.
"""

from __future__ import annotations

import math

import numpy as np
import pytest

from ldpcmarg import load_code
from ldpcmarg.analysis.bicm_capacity import bicm_capacity, bicm_shannon_limit_ebn0_db
from ldpcmarg.analysis.capacity import biawgn_capacity, gaussian_shannon_limit_ebn0_db
from ldpcmarg.analysis.llr_quality import mutual_information
from ldpcmarg.code.parity_check import ParityCheckCode
from ldpcmarg.engine.simulate import StopRule, simulate
from ldpcmarg.engine.store import Store
from ldpcmarg.errors import InputError
from ldpcmarg.link.fading import parse_fading
from ldpcmarg.link.link import Link
from ldpcmarg.link.modulation import make_constellation
from ldpcmarg.plots.curves import curves_from_file, curves_from_store, plot_curves


# ------------------------------------------------------------------ BICM capacity
def test_bpsk_bicm_is_the_biawgn_capacity():
    bpsk = make_constellation("bpsk")
    for es in (-6.0, 0.0, 4.0):
        assert bicm_capacity(bpsk, es) == pytest.approx(biawgn_capacity(esn0_db=es), abs=1e-6)
    # BI-AWGN Shannon limit for rate 1/2: 0.187 dB (Richardson & Urbanke, Modern Coding Theory)
    assert bicm_shannon_limit_ebn0_db(bpsk, 0.5) == pytest.approx(0.187, abs=0.002)


def test_gray_qpsk_is_two_bpsk_channels():
    # exact identity (DESIGN §9): Gray 4-PSK = two BPSK at half the symbol energy; the
    # 2-D product rule (24 x 24 nodes) is good to about 1e-4 bits at these SNRs
    qpsk = make_constellation("qpsk")
    for es in (-3.0, 2.0, 7.0):
        assert bicm_capacity(qpsk, es) == pytest.approx(
            2 * biawgn_capacity(esn0_db=es - 10 * math.log10(2)), abs=1e-4)


@pytest.mark.parametrize("name,rate", [("8psk", 2 / 3), ("qam16", 0.5), ("qam64", 0.75),
                                       ("qam256", 0.8)])
def test_bicm_limit_sits_right_of_the_unconstrained_limit(name, rate):
    # Shannon: no input beats Gaussian input, Eb/N0 >= (2^(R m) - 1)/(R m) in dB for a
    # complex channel of R m bits per symbol; the real-channel form with rate R m / 2
    # per dimension is the same number
    const = make_constellation(name)
    m = const.bits_per_symbol
    limit = bicm_shannon_limit_ebn0_db(const, rate)
    shannon = gaussian_shannon_limit_ebn0_db(rate * m / 2)
    assert shannon < limit < shannon + 1.5  # BICM with Gray labels loses a fraction of a dB
    # and the capacity never exceeds m bits nor log2(1 + SNR) (Shannon)
    for es in (0.0, 10.0, 25.0):
        c = bicm_capacity(const, es)
        assert 0 < c <= m + 1e-9 and c < math.log2(1 + 10 ** (es / 10))


def test_rayleigh_bpsk_rate_half_limit():
    # fully interleaved Rayleigh fading, BPSK, perfect CSI, rate 1/2: about 1.8 dB
    # (from memory; widely quoted for turbo codes on the Rayleigh channel)
    lim = bicm_shannon_limit_ebn0_db(make_constellation("bpsk"), 0.5,
                                     fading=parse_fading("rayleigh"))
    assert lim == pytest.approx(1.83, abs=0.1)


@pytest.mark.parametrize("name,fading,esn0_db", [("qam16", "rayleigh", 8.0),
                                                 ("8psk", "rician:K=3", 6.0),
                                                 ("qam16", None, 5.0)])
def test_quadrature_agrees_with_monte_carlo_of_the_demapper(name, fading, esn0_db):
    # an independent route: mutual information of the link's own exact LLRs
    # (scrambled, so the all-zero word stands for uniform bits)
    code = ParityCheckCode(np.zeros((1, 4096), dtype=np.uint8), name="uncoded-4096")
    link = Link.build(code, modulation=name, fading=fading)
    llr = link.sample_llr(np.zeros((6, 4096), np.uint8), esn0_db, np.random.default_rng(17),
                          linear=False)
    mi, se = mutual_information(np.zeros_like(llr, dtype=np.uint8), llr, return_stderr=True)
    m = link.bits_per_symbol
    quad = bicm_capacity(make_constellation(name), esn0_db,
                         fading=None if fading is None else parse_fading(fading)) / m
    # 5 standard errors (bits of one symbol are correlated, which the error understates)
    assert quad == pytest.approx(mi, abs=5 * se + 2e-3)


def test_block_fading_has_no_ergodic_limit():
    with pytest.raises(InputError, match="outage"):
        bicm_capacity(make_constellation("qpsk"), 3.0, fading=parse_fading("rayleigh:block=4"))


# ------------------------------------------------------------------ figures
def _texts(fig):
    title = fig._suptitle.get_text() if fig._suptitle is not None else ""
    # one shared figure legend below the panels (or one per axes when axes were given)
    legends = list(fig.legends) + [ax.get_legend() for ax in fig.axes if ax.get_legend()]
    legend = [t.get_text() for lg in legends for t in lg.get_texts()]
    return title, legend


def _run_json(tmp_path, **link):
    code = load_code("hamming-7-4")
    lk = Link.build(code, **link) if link else None
    res = simulate(code, ["sum-product"], [2.0, 4.0], link=lk, seed=3,
                   stop=StopRule(frame_errors=20, max_frames=300))
    path = tmp_path / "r.json"
    res.write_json(path)
    return path, res


def test_link_figure_names_the_link_and_draws_the_bicm_limit(tmp_path):
    path, res = _run_json(tmp_path, modulation="qam16", fading="rayleigh", puncture=1)
    curves = curves_from_file(path)
    fig = plot_curves(curves, tmp_path / "f.png")
    title, legend = _texts(fig)
    assert "qam16" in title and "rayleigh" in title and "R_t=0.6667" in title
    assert not any(t.startswith("Shannon limit") for t in legend)  # not the BI-AWGN line
    lim = bicm_shannon_limit_ebn0_db(make_constellation("qam16"), 4 / 6,
                                     fading=parse_fading("rayleigh"))
    assert any(t.startswith("BICM limit qam16, rayleigh, R_t=0.667") and f"{lim:.3g}" in t
               for t in legend)
    assert (tmp_path / "f.png").stat().st_size > 0


def test_block_fading_figure_leaves_the_limit_out_with_a_note(tmp_path):
    path, _ = _run_json(tmp_path, modulation="qpsk", fading="rayleigh:block=7")
    title, legend = _texts(plot_curves(curves_from_file(path)))
    assert "rayleigh:block=7" in title
    assert not any("limit R=" in t or t.startswith("BICM") for t in legend)
    assert any("no Shannon limit drawn for block fading" in t for t in legend)


def test_plain_bpsk_figure_keeps_the_biawgn_limit(tmp_path):
    path, _ = _run_json(tmp_path)
    title, legend = _texts(plot_curves(curves_from_file(path)))
    # the default title names the code and channel but no link
    assert "link:" not in title and any(t.startswith("Shannon limit R=0.571") for t in legend)


def test_mixed_links_go_into_the_legend(tmp_path):
    a, _ = _run_json(tmp_path, modulation="8psk")
    b = tmp_path / "b.json"
    a.rename(b)
    c, _ = _run_json(tmp_path)
    title, legend = _texts(plot_curves(curves_from_file(b) + curves_from_file(c)))
    assert "link:" not in title                    # no single link to name
    assert any("[8psk, R_t=0.5714]" in t for t in legend)
    assert any(t.startswith("Shannon limit R=0.571") for t in legend)  # the BPSK curve's
    assert any(t.startswith("BICM limit 8psk") for t in legend)


def test_store_and_csv_carry_the_link(tmp_path):
    code = load_code("hamming-7-4")
    link = Link.build(code, modulation="qam16:maxlog", shorten=1)
    store = tmp_path / "s.sqlite"
    with Store.open_writer(store, code) as st:
        res = simulate(code, ["min-sum"], [6.0, 9.0], snr_kind="esn0_db", link=link, seed=2,
                       store=st, stop=StopRule(frame_errors=20, max_frames=200))
    res.write_csv(tmp_path / "r.csv")
    from_store = curves_from_store(store)[0]
    from_csv = curves_from_file(tmp_path / "r.csv")[0]
    # Eb/N0 = Es/N0 - 10 log10(R_t m) with R_t = 3/6 and m = 4 (DESIGN §9)
    want = np.array([6.0, 9.0]) - 10 * math.log10(0.5 * 4)
    np.testing.assert_allclose(from_store.x, want)
    np.testing.assert_allclose(from_csv.x, want)
    for c in (from_store, from_csv):
        assert c.link["modulation"] == "qam16" and c.link["demapper"] == "maxlog"
        assert c.link["transmitted_rate"] == pytest.approx(0.5) and c.link["shorten"] == 1
    title, _ = _texts(plot_curves([from_store]))
    assert "qam16 max-log" in title and "short 1" in title and "R_t=0.5" in title
