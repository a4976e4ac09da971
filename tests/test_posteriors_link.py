"""Posteriors of received link data: symbols and gains in, decoder posteriors out.

The round trip sends random codewords through :class:`Link`, saves what the
receiver sees in the documented input format, runs ``ldpcmarg posteriors``
and compares with decoding the link's own LLRs, bit for bit.
"""

from __future__ import annotations

import json

import numpy as np
import pytest
from cli_helpers import run_cli

from ldpcmarg import load_code, make_decoder
from ldpcmarg._settings import LLR_MAX
from ldpcmarg.analysis.posteriors import compute_posteriors, read_posteriors
from ldpcmarg.errors import InputError
from ldpcmarg.link.link import Link

CODE = "tanner-155-64"
DECODER = "sum-product:early_stop=false,max_iter=30"


def _random_codewords(code, link, frames, seed):
    """Random codewords through the encoder, shortened information bits fixed to 0."""
    rng = np.random.default_rng(seed)
    msgs = rng.integers(0, 2, size=(frames, code.k), dtype=np.uint8)
    shortened = np.isin(code.info_positions, link.rate_matching.shortened)
    msgs[:, shortened] = 0
    return code.encode(msgs)


def _save(path, tx):
    arrays = {"y": tx.symbols}
    if tx.gains is not None:
        arrays["h"] = tx.gains
    np.savez(path, **arrays)


# A demo scenario of our own: a rate-1/2 mother code stretched over several links.
LINKS = [
    ({"modulation": "qpsk", "fading": "rayleigh:block=5", "puncture": 15}, 9.0),
    ({"modulation": "qam16", "interleaver": 7, "shorten": 10, "quantize": "q=6"}, 9.0),
    ({"modulation": "8psk:maxlog", "fading": "rician:K=4"}, 11.0),
    ({"modulation": "bpsk", "fading": "erasure:p=0.05,block=31"}, 6.0),
    ({"modulation": "qam64", "puncture": 20, "interleaver": 3}, 14.0),
]


@pytest.mark.parametrize("settings,ebn0", LINKS, ids=lambda v: str(v))
def test_cli_round_trip_equals_decoding_the_link_llrs(tmp_path, capsys, settings, ebn0):
    code = load_code(CODE)
    link = Link.build(code, warn=False, **settings)
    cw = _random_codewords(code, link, frames=6, seed=4)
    tx = link.transmit(cw, link.esn0_linear(ebn0), np.random.default_rng(21))
    inp = tmp_path / "rx.npz"
    _save(inp, tx)
    out = tmp_path / "post.npz"
    args = ["posteriors", CODE, inp, "-o", out, "-d", DECODER, "--ebn0", repr(ebn0)]
    for key, value in settings.items():
        args += [f"--{key}", str(value)]
    st, so, se = run_cli(args, capsys)
    assert st == 0, se
    res = read_posteriors(out)
    ref = make_decoder(DECODER, code).decode(tx.llr)
    assert np.array_equal(res.llr, ref.posterior_llr)
    assert np.array_equal(res.bits, ref.bits)
    assert np.array_equal(res.iterations, ref.iterations)
    # the sent codewords come back: the SNRs are well above these links' waterfalls
    # (common practice: several dB of margin), so a wrong de-interleaver, label order
    # or re-insertion would show as decoding failures
    assert np.array_equal(res.bits, cw)
    ch = res.meta["channel"]
    assert ch["modulation"] == settings["modulation"].split(":")[0]
    assert ch["fading"] == link.fading.kind and ch["block"] == link.fading.block
    assert ch["transmitted_rate"] == pytest.approx(link.transmitted_rate)
    assert ch["ebn0_db"] == pytest.approx(ebn0) and ch["scrambler"] is False
    assert res.meta["input"] == "received-symbols" and res.meta["link"]["interleaver"] == \
        settings.get("interleaver")


@pytest.mark.parametrize("modulation", ["bpsk", "qpsk", "8psk", "qam16", "qam64:maxlog",
                                        "qam256"])
@pytest.mark.parametrize("fading", [None, "rayleigh", "rician:K=2,block=3", "erasure:p=0.2"])
def test_transmit_gives_the_simulator_llrs_bit_for_bit(modulation, fading):
    # the receiver of posteriors and the simulator's fused channel must agree exactly
    code = load_code("hamming-7-4")
    link = Link.build(code, modulation=modulation, fading=fading, puncture=1, interleaver=2,
                      warn=False)
    cw = np.zeros((40, 7), dtype=np.uint8)
    sim = link.sample_llr(cw, 2.5, np.random.default_rng(9))
    tx = link.transmit(cw, 2.5, np.random.default_rng(9), scramble=True)
    assert np.array_equal(sim, tx.llr)
    if tx.scrambler is None:
        assert np.array_equal(link.receive(tx.symbols, tx.gains, 2.5), sim)


def test_qpsk_posteriors_equal_decoding_the_simulator_llrs():
    # Gray 4-PSK is not scrambled: the symbols of transmit and the LLRs of the
    # simulator's own path come from the same draws
    code = load_code(CODE)
    link = Link.build(code, modulation="qpsk", fading="rayleigh", shorten=4)
    cw = _random_codewords(code, link, frames=5, seed=1)
    esn0 = link.esn0_linear(5.0)
    tx = link.transmit(cw, esn0, np.random.default_rng(3))
    sim = link.sample_llr(cw, esn0, np.random.default_rng(3))
    res = compute_posteriors(code, DECODER, outputs=tx.symbols, gains=tx.gains, link=link,
                             channel="awgn:ebn0=5.0")
    ref = make_decoder(DECODER, code).decode(sim)
    assert np.array_equal(res.llr, ref.posterior_llr)


@pytest.mark.parametrize("modulation", ["bpsk", "qpsk", "8psk", "qam16", "qam256"])
def test_documented_symbol_format_by_hand(modulation):
    """Noise-free symbols built from the documented format alone (not via transmit)."""
    code = load_code("hamming-7-4")
    link = Link.build(code, modulation=modulation, puncture=1, shorten=1, interleaver=5)
    rm, const = link.rate_matching, link.constellation
    cw = _random_codewords(code, link, frames=8, seed=2)
    sent = cw[:, rm.sent_positions]
    perm = np.random.default_rng(5).permutation(rm.n_sent)  # the documented interleaver
    stream = sent[:, perm]
    m = const.bits_per_symbol
    S = -(-rm.n_sent // m)
    stream = np.concatenate([stream, np.zeros((8, S * m - rm.n_sent), np.uint8)], axis=1)
    labels = stream.reshape(8, S, m) @ (1 << np.arange(m - 1, -1, -1))  # MSB first
    point_of = {int(lb): pt for lb, pt in zip(const.labels, const.points, strict=True)}
    y = np.vectorize(lambda lb: point_of[int(lb)])(labels).astype(np.complex128)
    llr = link.receive(y, None, 1e4)  # Es/N0 = 40 dB: signs are the sent bits
    keep = np.ones(7, bool)
    keep[rm.punctured] = False
    keep[rm.shortened] = False
    assert np.array_equal(llr[:, keep] < 0, cw[:, keep] == 1)
    assert np.all(llr[:, rm.punctured] == 0.0) and np.all(llr[:, rm.shortened] == LLR_MAX)


def test_noise_level_spellings_agree():
    code = load_code(CODE)
    link = Link.build(code, modulation="qam16", puncture=10)
    cw = _random_codewords(code, link, frames=3, seed=5)
    tx = link.transmit(cw, 3.0, np.random.default_rng(8), linear=False)
    ebn0 = link.ebn0_db(3.0)
    a = compute_posteriors(code, "min-sum", outputs=tx.symbols, link=link,
                           channel=f"awgn:ebn0={ebn0!r}")
    b = compute_posteriors(code, "min-sum", outputs=tx.symbols, link=link, channel="awgn:esn0=3")
    c = compute_posteriors(code, "min-sum", outputs=tx.symbols, link=link,
                           channel={"sigma": a.meta["channel"]["sigma"]})
    # Es/N0 = R_t m Eb/N0 (DESIGN §9); N0 = 2 sigma^2 with Es = 1
    assert b.meta["channel"]["ebn0_db"] == pytest.approx(ebn0)
    np.testing.assert_allclose(a.llr, b.llr, rtol=1e-9)
    np.testing.assert_allclose(c.llr, b.llr, rtol=1e-9)


def test_api_accepts_a_dict_of_link_settings():
    code = load_code(CODE)
    link = Link.build(code, modulation="8psk", fading="rayleigh")
    cw = _random_codewords(code, link, frames=2, seed=6)
    tx = link.transmit(cw, 12.0, np.random.default_rng(1), linear=False)
    res = compute_posteriors(code, DECODER, outputs=tx.symbols, gains=tx.gains,
                             link={"modulation": "8psk", "fading": "rayleigh"},
                             channel={"esn0": 12.0})
    assert np.array_equal(res.llr, make_decoder(DECODER, code).decode(tx.llr).posterior_llr)


@pytest.mark.parametrize("settings,data,match", [
    ({"modulation": "qam16"}, "short", "symbols per frame"),
    ({"modulation": "qam16"}, "real", "complex constellation"),
    ({"modulation": "qpsk", "fading": "rayleigh"}, "nogains", "needs the channel gains"),
    ({"modulation": "qpsk", "fading": "rayleigh"}, "badgains", "one gain per symbol"),
    ({"modulation": "qpsk"}, "nan", "NaN or infinite"),
])
def test_cli_bad_received_data_one_clear_error(tmp_path, capsys, settings, data, match):
    code = load_code("hamming-7-4")
    link = Link.build(code, **settings)
    tx = link.transmit(np.zeros((3, 7), np.uint8), 4.0, np.random.default_rng(0))
    y, h = tx.symbols, tx.gains
    if data == "short":
        y = y[:, :-1]
    elif data == "real":
        y = y.real.copy()
    elif data == "nogains":
        h = None
    elif data == "badgains":
        h = h[:, :1]
    elif data == "nan":
        y = y.copy()
        y[1, 0] = np.nan
    inp = tmp_path / "rx.npz"
    np.savez(inp, y=y, **({} if h is None else {"h": h}))
    out = tmp_path / "post.npy"
    args = ["posteriors", "hamming-7-4", inp, "-o", out, "--esn0", "4"]
    for key, value in settings.items():
        args += [f"--{key}", value]
    st, so, se = run_cli(args, capsys)
    assert st == 2
    assert se.startswith("Error: ") and match in se and "Traceback" not in se
    assert se.count("\n") == 1
    assert list(tmp_path.iterdir()) == [inp]  # nothing written


@pytest.mark.parametrize("extra,match", [
    (["--bsc", "0.1"], "need the AWGN channel"),
    ([], "need the noise level"),
    (["--sigma", "-1"], "finite number > 0"),
])
def test_cli_link_needs_an_awgn_noise_level(tmp_path, capsys, extra, match):
    inp = tmp_path / "rx.npy"
    np.save(inp, np.ones((1, 4), dtype=np.complex128))
    st, _, se = run_cli(["posteriors", "hamming-7-4", inp, "-o", tmp_path / "p.npz",
                         "--modulation", "qpsk"] + extra, capsys)
    assert st == 2 and se.startswith("Error: ") and match in se
    assert not (tmp_path / "p.npz").exists()


def test_link_recorded_in_npy_sidecar(tmp_path, capsys):
    code = load_code("hamming-7-4")
    link = Link.build(code, modulation="qam16:maxlog", quantize="q=5,step=0.5", shorten=1)
    tx = link.transmit(np.zeros((2, 7), np.uint8), 8.0, np.random.default_rng(0), linear=False)
    inp = tmp_path / "rx.npy"
    np.save(inp, tx.symbols)
    out = tmp_path / "post.npy"
    st, so, se = run_cli(["posteriors", "hamming-7-4", inp, "-o", out, "--esn0", "8",
                          "--modulation", "qam16:maxlog", "--quantize", "q=5,step=0.5",
                          "--shorten", "1"], capsys)
    assert st == 0, se
    assert "link: qam16:maxlog" in so
    side = json.loads((tmp_path / "post.npy.json").read_text())
    ch = side["meta"]["channel"]
    assert ch["demapper"] == "maxlog" and ch["quantize"] == "q=5,step=0.5"
    assert ch["quantizer_step"] == 0.5 and ch["shorten"] == 1
    # R_t = (k - s) / (n - p - s) = 3 / 6 (DESIGN §9)
    assert ch["transmitted_rate"] == pytest.approx(0.5) and ch["symbols_per_frame"] == 2


def test_api_errors():
    code = load_code("hamming-7-4")
    link = Link.build(code, modulation="qpsk")
    y = np.ones((1, 4), dtype=np.complex128)
    with pytest.raises(InputError, match="outputs="):
        compute_posteriors(code, llr=np.ones((1, 7)), link=link)
    with pytest.raises(InputError, match="only with a link"):
        compute_posteriors(code, outputs=np.ones((1, 7)), channel="awgn:esn0=1", gains=y)
    with pytest.raises(InputError, match="noise level"):
        compute_posteriors(code, outputs=y, link=link, channel="bsc:p=0.1")
    with pytest.raises(InputError, match="n = 155"):
        compute_posteriors(load_code(CODE), outputs=y, link=link, channel="awgn:esn0=1")
