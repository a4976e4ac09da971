"""``ldpcmarg limits``: finite-length limits (normal approximation, RCU, sphere packing)."""

from __future__ import annotations

import json

import click

from ..errors import InputError

_PARAM_TEXT = {"awgn": "Eb/N0 [dB]", "bsc": "crossover p", "bec": "erasure prob."}


def _code_size(code, n, k):
    if code is not None:
        if n is not None or k is not None:
            raise InputError("Give either a CODE or -n/-k, not both.")
        from .. import load_code

        c = load_code(code)
        return int(c.n), int(c.k)
    if n is None or k is None:
        raise InputError("Give a CODE, or both -n N and -k K.")
    return n, k


def _fmt(v) -> str:
    return "-" if v is None else f"{v:.4e}"


@click.command("limits")
@click.argument("code", required=False)
@click.option("--channel", type=click.Choice(["awgn", "bsc", "bec"]), default="awgn",
              show_default=True, help="Channel.")
@click.option("--param", "params", type=float, multiple=True, required=True,
              help="Channel parameter: Eb/N0 in dB (awgn, rate k/n), crossover "
                   "probability (bsc) or erasure probability (bec); repeatable.")
@click.option("-n", "n", type=click.IntRange(min=2), default=None, help="Block length.")
@click.option("-k", "k", type=click.IntRange(min=1), default=None,
              help="Information bits per block.")
@click.option("--json", "as_json", is_flag=True,
              help="Print JSON (one object; a list with several --param).")
def command(code, channel, params, n, k, as_json):
    """Best frame error rates any code of length n with k information bits allows.

    Prints, at each channel parameter, the normal approximation (with the
    1/2 log2 n term), the random-coding union bound RCU (achievable under ML;
    exact on BSC/BEC, a saddlepoint approximation of the RCU_s bound on
    BI-AWGN) and, on AWGN, Shannon's 1959 sphere-packing bound (no code of
    equal-energy words does better). n and k come from -n/-k or from CODE.
    These are model figures, not a certification of any real link.
    """
    from ..analysis.limits import finite_length_limits

    n, k = _code_size(code, n, k)
    rows = [finite_length_limits(channel, p, n, k).to_dict() for p in params]
    if as_json:
        click.echo(json.dumps(rows[0] if len(rows) == 1 else rows, indent=2))
        return
    click.echo(f"finite-length limits, {channel}, n = {n}, k = {k}, R = {k / n:.4f}")
    click.echo(f"{_PARAM_TEXT[channel]:>14}  {'sphere packing':>14}  {'normal approx':>14}  "
               f"{'RCU':>12}  {'capacity':>9}")
    for r in rows:
        click.echo(f"{r['param']:>14.4g}  {_fmt(r['sphere_packing']):>14}  "
                   f"{_fmt(r['normal_approximation']):>14}  {_fmt(r['rcu']):>12}  "
                   f"{r['capacity']:>9.5f}")
    click.echo(f"RCU: {rows[0]['rcu_method']}; sphere packing: Shannon 1959 (AWGN only).")
