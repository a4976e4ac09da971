"""The link as built: modulation, demapper, fading, rate matching, quantiser.

Checks against the outside world name their source beside them.
"""

from __future__ import annotations

import math
import warnings

import numpy as np
import pytest
from scipy import integrate
from scipy.special import erfc
from scipy.stats import norm

from ldpcmarg import make_decoder
from ldpcmarg.analysis.capacity import biawgn_capacity
from ldpcmarg.code.construct import random_regular
from ldpcmarg.code.parity_check import ParityCheckCode
from ldpcmarg.engine.simulate import StopRule, simulate
from ldpcmarg.errors import InputError
from ldpcmarg.link.fading import parse_fading
from ldpcmarg.link.link import Link
from ldpcmarg.link.modulation import demap, load_constellation, make_constellation
from ldpcmarg.link.quantize import parse_quantize
from ldpcmarg.link.rate_matching import LinkWarning

UNCODED = ParityCheckCode(np.zeros((1, 1536), dtype=np.uint8), name="uncoded-1536")


def _qfunc(x):
    return 0.5 * erfc(np.asarray(x) / math.sqrt(2.0))


def _uncoded_ber(modulation, ebn0, fading=None, frames=400, seed=11):
    link = Link.build(UNCODED, modulation=modulation, fading=fading)
    res = simulate(UNCODED, ["hard-decision"], [ebn0], seed=seed, link=link,
                   stop=StopRule(frame_errors=10**9, max_frames=frames))
    return res.points[0]


# ------------------------------------------------------------ closed forms
def _ber_qpsk(ebn0_db):
    # Gray QPSK: Pb = Q(sqrt(2 Eb/N0)) exactly (Proakis, Digital Communications, ch. 5)
    return float(_qfunc(math.sqrt(2 * 10 ** (ebn0_db / 10))))


def _ber_psk_exact(M, ebn0_db):
    """Gray M-PSK BER by integrating the phase density over the decision sectors.

    Phase density of PSK in AWGN (Proakis, Digital Communications, sec. 5.2.7):
    p(t) = e^{-g}/(2 pi) + sqrt(g/pi) cos t e^{-g sin^2 t} Phi(sqrt(2 g) cos t), g = Es/N0.
    """
    m = int(math.log2(M))
    g = m * 10 ** (ebn0_db / 10)

    def pdf(t):
        return (math.exp(-g) / (2 * math.pi) + math.sqrt(g / math.pi) * math.cos(t)
                * math.exp(-g * math.sin(t) ** 2) * norm.cdf(math.sqrt(2 * g) * math.cos(t)))

    gray = [k ^ (k >> 1) for k in range(M)]
    total = 0.0
    for k in range(1, M):
        lo, hi = (2 * k - 1) * math.pi / M, (2 * k + 1) * math.pi / M
        pk = integrate.quad(pdf, lo, hi, epsabs=1e-13)[0]
        # average Hamming distance over transmitted points (Gray PSK is not cyclic-regular)
        dist = np.mean([bin(gray[i] ^ gray[(i + k) % M]).count("1") for i in range(M)])
        total += dist * pk
    return total / m


def _ber_square_qam(M, ebn0_db):
    """Gray square M-QAM BER, Cho & Yoon, IEEE Trans. Commun. 50(7), 2002, eqs. (14)-(16)."""
    sq = int(round(math.sqrt(M)))
    g = 10 ** (ebn0_db / 10)
    arg = math.sqrt(3 * math.log2(M) * g / (2 * (M - 1)))
    total = 0.0
    nk = int(math.log2(sq))
    for k in range(1, nk + 1):
        pk = 0.0
        for i in range(int((1 - 2.0 ** (-k)) * sq)):
            w = (-1) ** math.floor(i * 2 ** (k - 1) / sq) * (
                2 ** (k - 1) - math.floor(i * 2 ** (k - 1) / sq + 0.5))
            pk += w * erfc((2 * i + 1) * arg)
        total += pk / sq
    return total / nk


@pytest.mark.parametrize("modulation,ref,points", [
    ("qpsk", _ber_qpsk, (2.0, 5.0, 8.0)),
    ("8psk", lambda eb: _ber_psk_exact(8, eb), (4.0, 7.0, 10.0)),
    ("qam16:maxlog", lambda eb: _ber_square_qam(16, eb), (4.0, 7.0, 10.0)),
    ("qam64:maxlog", lambda eb: _ber_square_qam(64, eb), (6.0, 9.0, 12.0)),
])
def test_uncoded_ber_matches_closed_form(modulation, ref, points):
    """Uncoded Gray BER inside the simulator's 95 % interval at three SNRs each.

    The closed forms are for symbol-by-symbol minimum-distance detection, which
    is what the sign of a max-log LLR gives (for QPSK exact and max-log agree in
    sign). With ~600k bits per point the intervals are a few percent wide; the
    fixed seed keeps the check repeatable.
    """
    for eb in points:
        p = _uncoded_ber(modulation, eb)
        expected = ref(eb)
        lo, hi = p.ber_ci
        assert lo <= expected <= hi, (modulation, eb, p.ber, expected, (lo, hi))


def test_cho_yoon_formula_agrees_with_direct_pam_count():
    """The Cho & Yoon expression vs a direct count over 4-PAM decision regions (16-QAM)."""
    g = 10 ** (6.0 / 10)
    # per-dimension noise std in units of the level grid (levels +-1, +-3 times sqrt(1/10)):
    # Es/N0 = 4 Eb/N0, sigma^2 = N0/2 = 1/(8 g), divided by the scale 1/10
    sig = math.sqrt(10 / (8 * g))
    levels = [-3, -1, 1, 3]
    gray = [0, 1, 3, 2]
    total = 0.0
    for i, lv in enumerate(levels):  # transmitted level
        for j, lj in enumerate(levels):  # decided level
            lo = -np.inf if j == 0 else (lj - 1 - lv)
            hi = np.inf if j == 3 else (lj + 1 - lv)
            pr = norm.cdf(hi / sig) - norm.cdf(lo / sig)
            total += pr * bin(gray[i] ^ gray[j]).count("1")
    direct = total / (4 * 2)
    assert _ber_square_qam(16, 6.0) == pytest.approx(direct, rel=1e-10)


def test_scrambler_makes_all_zero_word_representative():
    """Without the scrambler the all-zero word of 16-QAM is a corner point with a lower BER.

    With it (the engine's default) the counts match Cho & Yoon (test above); here
    the unscrambled corner point's BER is measurably below the average.
    """
    link = Link.build(UNCODED, modulation="qam16:maxlog")
    assert link.scrambled
    rng = np.random.default_rng(5)
    zeros = np.zeros((300, UNCODED.n), dtype=np.uint8)
    scr = np.mean(link.sample_llr(zeros, link.esn0_linear(6.0), rng) < 0)
    object.__setattr__(link, "_sym_cache", True)  # switch the scrambler off
    plain = np.mean(link.sample_llr(zeros, link.esn0_linear(6.0), rng) < 0)
    ref = _ber_square_qam(16, 6.0)
    assert abs(scr - ref) < 0.05 * ref
    assert plain < 0.8 * ref


def test_random_codewords_agree_with_scrambled_all_zero():
    """Coded 16-QAM: random codewords and the scrambled all-zero word give the same FER.

    Both are estimates of one quantity; their 95 % intervals must overlap.
    """
    code = random_regular(96, 3, 6, seed=2)
    link = Link.build(code, modulation="qam16")
    stop = StopRule(frame_errors=10**9, max_frames=3000)
    a = simulate(code, ["sum-product"], [5.0], seed=3, link=link, stop=stop).points[0]
    b = simulate(code, ["sum-product"], [5.0], seed=4, link=link, stop=stop,
                 random_codewords=True).points[0]
    assert a.fer_ci[0] <= b.fer_ci[1] and b.fer_ci[0] <= a.fer_ci[1]
    assert 0.01 < a.fer < 0.9  # a point where the comparison means something


# ------------------------------------------------------------ fading
def test_rayleigh_bpsk_matches_closed_form():
    """Uncoded BPSK, fast Rayleigh: Pb = 1/2 (1 - sqrt(g/(1+g))), g = Eb/N0 (Proakis ch. 14)."""
    for eb in (0.0, 5.0, 10.0):
        p = _uncoded_ber("bpsk", eb, fading="rayleigh")
        g = 10 ** (eb / 10)
        expected = 0.5 * (1 - math.sqrt(g / (1 + g)))
        assert p.ber_ci[0] <= expected <= p.ber_ci[1], (eb, p.ber, expected)


def test_block_length_one_equals_fast_fading():
    code = random_regular(96, 3, 6, seed=2)
    for mod in ("bpsk", "qam16", "8psk"):
        fast = Link.build(code, modulation=mod, fading="rician:K=2")
        blk = Link.build(code, modulation=mod, fading="rician:K=2,block=1")
        cw = np.zeros((20, code.n), dtype=np.uint8)
        a = fast.sample_llr(cw, 3.0, np.random.default_rng(9))
        b = blk.sample_llr(cw, 3.0, np.random.default_rng(9))
        np.testing.assert_array_equal(a, b)


def test_block_fading_holds_the_gain():
    f = parse_fading("rayleigh:block=4")
    h = f.gains(3, 10, np.random.default_rng(0))
    assert h.shape == (3, 10)
    assert np.all(h[:, 0:4] == h[:, [0]]) and np.all(h[:, 8:10] == h[:, [8]])
    assert not np.all(h[:, 4] == h[:, 0])


def test_erasure_fading_gives_zero_llrs():
    code = random_regular(96, 3, 6, seed=2)
    link = Link.build(code, modulation="qpsk", fading="erasure:p=0.3,block=6")
    llr = link.sample_llr(np.zeros((50, code.n), np.uint8), 10.0, np.random.default_rng(1))
    zero = llr == 0.0
    assert 0.2 < zero.mean() < 0.4
    # whole blocks of 6 symbols = 12 bits go together
    assert np.all(zero[:, 0:12] == zero[:, [0]])


# ------------------------------------------------------------ mutual information
def _mi_bits(llr, bits):
    """Per-bit MI estimate 1 - E log2(1 + exp(-(1-2b) L)) (Hagenauer 2004; exact for true LLRs)."""
    s = (1.0 - 2.0 * bits) * llr
    return 1.0 - np.mean(np.logaddexp(0.0, -s)) / math.log(2.0)


def _sample(mod, esn0_db, frames=200, demapper=None, seed=3):
    code = ParityCheckCode(np.zeros((1, 1200), dtype=np.uint8), name="u")
    spec = mod if demapper is None else f"{mod}:{demapper}"
    link = Link.build(code, modulation=spec)
    llr = link.sample_llr(np.zeros((frames, code.n), np.uint8), esn0_db,
                          np.random.default_rng(seed), linear=False)
    return llr


def test_gray_qpsk_is_two_bpsk_at_half_the_energy():
    """Gray 4-PSK per bit at Es/N0 == BPSK at Es/N0 - 3 dB (exact identity, DESIGN §9)."""
    c = make_constellation("qpsk")
    rng = np.random.default_rng(4)
    y = rng.standard_normal((5, 40)) + 1j * rng.standard_normal((5, 40))
    n0 = 0.7
    llr = demap(c, y, 1.0, n0)
    # LSB on the in-phase axis, MSB on the quadrature, amplitude 1/sqrt 2
    np.testing.assert_allclose(llr[:, 1::2], 4 * y.real / math.sqrt(2) / n0, rtol=1e-12)
    np.testing.assert_allclose(llr[:, 0::2], 4 * y.imag / math.sqrt(2) / n0, rtol=1e-12)
    # and the MI per bit equals the BI-AWGN capacity at Es/N0 - 3 dB (10 log10 2)
    for es in (0.0, 4.0):
        mi = _mi_bits(_sample("qpsk", es), 0)
        ref = biawgn_capacity(esn0_db=es - 10 * math.log10(2))
        assert abs(mi - ref) < 0.005  # Monte Carlo over 240k bits: std error ~1e-3


def test_qam16_mutual_information_below_shannon():
    """BICM MI of 16-QAM < 4 bits and < log2(1 + SNR) at every SNR (Shannon 1948)."""
    for es in (0.0, 5.0, 10.0, 15.0, 20.0):
        mi = 4 * _mi_bits(_sample("qam16", es), 0)
        assert mi < 4.0
        assert mi < math.log2(1 + 10 ** (es / 10))


def test_maxlog_approaches_exact_and_never_has_more_information():
    """Max-log LLRs converge to exact ones as SNR grows; their MI is never higher (common
    practice; data processing: max-log is a mismatched function of the same y)."""
    gaps = []
    for es in (4.0, 10.0, 16.0):
        ex = _sample("qam16", es, seed=8)
        ml = _sample("qam16", es, demapper="maxlog", seed=8)
        assert _mi_bits(ml, 0) <= _mi_bits(ex, 0) + 1e-12
        gaps.append(np.median(np.abs(ml - ex) / np.maximum(np.abs(ex), 1e-9)))
    assert gaps[0] > gaps[1] > gaps[2]


# ------------------------------------------------------------ rate matching
def test_puncture_and_shorten_equal_hand_set_llrs():
    code = random_regular(96, 3, 6, seed=2)
    link = Link.build(code, puncture=10, shorten=8)
    assert link.transmitted_rate == pytest.approx((code.k - 8) / (96 - 10 - 8))
    cw = np.zeros((30, code.n), np.uint8)
    es = link.esn0_linear(2.0)
    got = link.sample_llr(cw, es, np.random.default_rng(6))
    # by hand: BPSK-AWGN noise for the 78 sent bits in index order, 0 / +LLR_MAX elsewhere
    sigma = math.sqrt(1 / (2 * es))
    z = np.random.default_rng(6).standard_normal((30, 78))
    sent = link.rate_matching.sent_positions
    hand = np.zeros((30, 96))
    hand[:, sent] = (z * sigma + 1.0) * (2 / sigma**2)
    hand[:, link.rate_matching.shortened] = 1.0e4
    np.testing.assert_array_equal(got, hand)
    assert np.all(got[:, :10] == 0)
    dec = make_decoder("sum-product", code)
    np.testing.assert_array_equal(dec.decode(got).bits, dec.decode(hand).bits)


def test_shortened_simulation_equals_explicitly_shortened_code():
    """Shortening s bits == decoding the code with those columns removed, bit for bit."""
    code = random_regular(96, 3, 6, seed=2)
    s = 12
    link = Link.build(code, shorten=s)
    short_cols = link.rate_matching.shortened
    keep = np.setdiff1d(np.arange(code.n), short_cols)
    short = ParityCheckCode(code.H.toarray()[:, keep], name="explicit-short")
    stop = StopRule(frame_errors=10**9, max_frames=400)
    # (not the fixed-point decoders: the format gives shortened bits +QMAX, a finite
    # level that check messages can outweigh, unlike removing the column)
    for dec in ("sum-product", "min-sum"):
        a = simulate(code, [dec], [2.0], seed=5, link=link, stop=stop,
                     chunk_frames=100).points[0]
        b = simulate(short, [dec], [2.0], seed=5, stop=stop, chunk_frames=100).points[0]
        assert a.frame_errors == b.frame_errors
        assert a.bit_errors == b.bit_errors
        assert a.iterations == b.iterations
        assert a.frame_errors > 0


# ------------------------------------------------------------ quantiser
def test_quantizer_levels_and_default_step():
    code = random_regular(96, 3, 6, seed=2)
    link = Link.build(code, quantize="q=4,step=0.5", puncture=4)
    llr = link.sample_llr(np.zeros((10, 96), np.uint8), 2.0, np.random.default_rng(0))
    lv = llr / 0.5
    assert np.all(lv == np.round(lv)) and np.abs(lv).max() <= 7
    assert np.all(llr[:, :4] == 0)
    auto = Link.build(code, quantize="q=5")
    assert auto.quantizer_step(1.0) == pytest.approx((4 + 2 * math.sqrt(8)) / 15)


# ------------------------------------------------------------ bad input
@pytest.mark.parametrize("text,match", [
    ("00 1 0\n01 0 1\n11 -1 0\n00 0 -1\n", "repeats the label"),
    ("00 1 0\n01 1 0\n11 -1 0\n10 0 -1\n", "repeats the point"),
    ("00 1 0\n01 0 1\n11 -1 0\n", "power of two"),
    ("0 1 0\n01 0 1\n11 -1 0\n10 0 -1\n", "binary digits"),
])
def test_bad_constellation_files(tmp_path, text, match):
    p = tmp_path / "c.txt"
    p.write_text(text)
    with pytest.raises(InputError, match=match):
        load_constellation(p)


def test_user_constellation_file(tmp_path):
    p = tmp_path / "sq.txt"
    p.write_text("# rotated square\n00 2 2\n01 -2 2\n11 -2 -2\n10 2 -2\n")
    c = load_constellation(p)
    assert np.mean(np.abs(c.points) ** 2) == pytest.approx(1.0)
    q = make_constellation("qpsk")
    y = np.array([[0.3 + 0.2j, -1.1 + 0.4j]])
    np.testing.assert_allclose(demap(c, y, 1.0, 0.5), demap(q, y, 1.0, 0.5), rtol=1e-12)


def test_bad_link_settings(tmp_path):
    code = random_regular(96, 3, 6, seed=2)
    pat = tmp_path / "p.txt"
    pat.write_text("1" * 97)
    with pytest.raises(InputError, match="longer than the code length"):
        Link.build(code, puncture=f"@{pat}")
    H = code.H.tocsr()
    row = H.indices[H.indptr[0]:H.indptr[1]]
    with pytest.raises(InputError, match="every bit of check"):
        Link.build(code, puncture=row)
    with pytest.raises(InputError, match="q between 2 and 16"):
        parse_quantize("q=1")
    with pytest.raises(InputError, match="block length"):
        parse_fading("rayleigh:block=0")
    with pytest.raises(InputError, match="Unknown modulation"):
        Link.build(code, modulation="qam32")


def test_punctured_stopping_set_warns():
    code = random_regular(96, 3, 6, seed=2)
    # 40 random bits: no check loses all its bits, yet peeling leaves some unresolved
    pattern = np.array([3, 4, 6, 13, 15, 16, 18, 19, 20, 21, 22, 25, 26, 28, 29, 31, 32, 33, 37,
                        39, 40, 44, 45, 50, 51, 57, 61, 62, 64, 66, 72, 73, 74, 77, 80, 81, 82,
                        83, 87, 94])
    rm_full = Link.build(code, puncture=pattern, warn=False).rate_matching
    if rm_full.undecodable == 0:  # pragma: no cover - depends on the fixed seed only
        pytest.fail("the fixed pattern should contain a stopping set")
    with warnings.catch_warnings(record=True) as rec:
        warnings.simplefilter("always")
        link = Link.build(code, puncture=pattern)
    assert link.rate_matching.undecodable == rm_full.undecodable
    # and the decoder indeed cannot resolve them even without noise: LLR 0 stays 0
    llr = np.full((1, 96), 20.0)
    llr[0, pattern] = 0.0
    post = make_decoder("sum-product", code).decode(llr).posterior_llr
    assert np.sum(post == 0.0) == link.rate_matching.undecodable
    assert any(issubclass(w.category, LinkWarning) for w in rec)
