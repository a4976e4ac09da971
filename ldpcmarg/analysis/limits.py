"""Finite-length limits: how well any code of length n and dimension k can do.

Three frame-error-probability figures for binary-input channels at block
length ``n`` (channel uses) and ``k`` information bits (``M = 2**k`` messages):

``normal_approximation``
    ``log2 M ~ n C - sqrt(n V) Qinv(eps) + 1/2 log2 n`` solved for ``eps``:
    ``eps = Q((n C - k + 1/2 log2 n) / sqrt(n V))`` with capacity ``C`` (bits)
    and dispersion ``V = Var[i(X;Y)]`` (bits**2) under uniform input
    (Polyanskiy, Poor & Verdu 2010). The same ``1/2 log2 n`` term is used for
    every channel; on the BEC the true third-order term is O(1) (same paper),
    so there the approximation is slightly optimistic. An approximation, not a bound.
``rcu``
    The random-coding union bound ``E[min(1, (M-1) P(i(Xbar;Y) >= i(X;Y) | X, Y))]``
    (same paper): an *achievability* bound (some code does at least this
    well under ML). Exact for the BSC and the BEC (finite sums). For BI-AWGN we
    report the **saddlepoint approximation of the RCU_s bound**
    ``E[min(1, (M-1) exp(-i_s(X;Y)))]`` with the generalised information
    density ``i_s`` and ``s`` optimised (Martinez & Guillen i Fabregas 2011);
    RCU_s is never below RCU, and the saddlepoint (Lugannani-Rice) form is an
    approximation of it.
``sphere_packing``
    Shannon's 1959 sphere-packing bound for codes whose words all have the
    same energy (BPSK codes do) on the AWGN channel: a *converse*, no code of
    that length and rate, under any decoder, has a lower FER. Only defined
    for ``awgn`` (``None`` otherwise).

Channel parameters: ``awgn`` takes Eb/N0 in dB with ``R = k/n``
(``sigma**2 = 1 / (2 R 10**(EbN0/10))``, BPSK +-1); ``bsc`` the crossover
probability ``p``; ``bec`` the erasure probability.

Numerics
--------
* BI-AWGN capacity and dispersion: moments of ``i = 1 - log2(1 + e^{-L})``,
  ``L ~ N(2/sigma**2, 4/sigma**2)``, by adaptive quadrature
  (``scipy.integrate.quad``) or, independently, by the trapezoid rule on a
  fine grid (spectrally accurate for smooth, fast-decaying integrands).
* Sphere packing: with the codeword at distance ``sqrt(n) A`` from the
  origin (``A = 1/sigma``), the probability that the noise leaves the cone of
  half-angle ``theta`` is ``P(sqrt(n) A + Z < cot(theta) R)`` with ``Z`` standard
  normal and ``R ~ chi_{n-1}`` independent (a noncentral-t probability); the
  cone's share of the sphere is the same expression with ``A = 0``. Both are
  integrated over ``ln R`` in the log domain (``log_ndtr`` plus log-sum-exp), so
  values far below 1e-300 stay finite and relative-accurate; ``theta`` solves
  "share = 1/M" by Brent's method on the logarithm. This is our own stable
  route; Valembois & Fossorier (2004) give a recursive one.

References
----------
Y. Polyanskiy, H. V. Poor and S. Verdu, "Channel coding rate in the finite
blocklength regime", IEEE Trans. Inf. Theory 56(5), 2307-2359, 2010.
doi:10.1109/TIT.2010.2043769
C. E. Shannon, "Probability of error for optimal codes in a Gaussian channel",
Bell Syst. Tech. J. 38(3), 611-656, 1959. doi:10.1002/j.1538-7305.1959.tb03905.x
A. Valembois and M. P. C. Fossorier, "Sphere-packing bounds revisited for
moderate block lengths", IEEE Trans. Inf. Theory 50(12), 2998-3014, 2004.
doi:10.1109/TIT.2004.838347
A. Martinez and A. Guillen i Fabregas, "Saddlepoint approximation of
random-coding bounds", Information Theory and Applications Workshop, 2011.
doi:10.1109/ITA.2011.5743574
"""

from __future__ import annotations

import math
from dataclasses import asdict, dataclass

import numpy as np
from scipy import integrate, optimize, special

from ..errors import InputError

__all__ = [
    "CHANNELS",
    "FiniteLengthLimits",
    "discrete_capacity_dispersion",
    "biawgn_capacity_dispersion",
    "bsc_capacity_dispersion",
    "bec_capacity_dispersion",
    "capacity_dispersion",
    "normal_approximation",
    "rcu",
    "sphere_packing_1959",
    "log_sphere_packing_1959",
    "finite_length_limits",
    "limit_curves",
    "awgn_sigma",
]

CHANNELS = ("awgn", "bsc", "bec")
_LN2 = math.log(2.0)


# ------------------------------------------------------------------ checks
def _check_nk(n, k) -> tuple[int, int]:
    try:
        n_i, k_i = int(n), int(k)
    except (TypeError, ValueError) as exc:
        raise InputError(f"n and k must be integers; got n={n!r}, k={k!r}.") from exc
    if n_i != n or k_i != k or n_i < 2 or not 1 <= k_i < n_i:
        raise InputError(f"Finite-length limits need integers 1 <= k < n with n >= 2; "
                         f"got n={n!r}, k={k!r}.")
    return n_i, k_i


def _check_channel(channel: str) -> str:
    if channel not in CHANNELS:
        raise InputError(f"Unknown channel {channel!r}; accepted: {', '.join(CHANNELS)}.")
    return channel


def _check_param(channel: str, param) -> float:
    try:
        v = float(param)
    except (TypeError, ValueError) as exc:
        raise InputError(f"The {channel} parameter must be a number; got {param!r}.") from exc
    if not math.isfinite(v):
        raise InputError(f"The {channel} parameter must be finite; got {param!r}.")
    if channel == "bsc" and not 0.0 <= v <= 0.5:
        raise InputError(f"The BSC crossover probability must be in [0, 0.5]; got {param!r}.")
    if channel == "bec" and not 0.0 <= v <= 1.0:
        raise InputError(f"The BEC erasure probability must be in [0, 1]; got {param!r}.")
    return v


def awgn_sigma(ebn0_db: float, rate: float) -> float:
    """Noise standard deviation of BPSK +-1 at Eb/N0 (dB) and rate R: ``1/sqrt(2 R Eb/N0)``."""
    return math.sqrt(1.0 / (2.0 * rate * 10.0 ** (ebn0_db / 10.0)))


# -------------------------------------------------- capacity and dispersion
def discrete_capacity_dispersion(transition) -> tuple[float, float]:
    """Capacity and dispersion of a binary-input discrete channel under uniform input.

    Parameters
    ----------
    transition : array_like of shape (2, Y), float
        ``W[x, y] = P(y | x)``; rows sum to 1.

    Returns
    -------
    capacity : float
        ``E[i(X;Y)]`` in bits (the capacity for symmetric channels).
    dispersion : float
        ``Var[i(X;Y)]`` in bits**2, with ``i(x;y) = log2(W(y|x) / P_Y(y))``.
    """
    W = np.asarray(transition, dtype=np.float64)
    if W.ndim != 2 or W.shape[0] != 2 or np.any(W < 0) or not np.allclose(W.sum(1), 1.0):
        raise InputError("The transition matrix must have shape (2, Y), non-negative "
                         "entries and rows summing to 1.")
    py = 0.5 * W.sum(axis=0)
    joint = 0.5 * W
    mask = joint > 0
    dens = np.zeros_like(W)
    dens[mask] = np.log2(W[mask] / np.broadcast_to(py, W.shape)[mask])
    mean = float((joint[mask] * dens[mask]).sum())
    second = float((joint[mask] * dens[mask] ** 2).sum())
    return mean, max(second - mean * mean, 0.0)


def bsc_capacity_dispersion(p: float) -> tuple[float, float]:
    """BSC(p) capacity (bits) and dispersion (bits**2) from its transition matrix."""
    p = _check_param("bsc", p)
    return discrete_capacity_dispersion([[1 - p, p], [p, 1 - p]])


def bec_capacity_dispersion(epsilon: float) -> tuple[float, float]:
    """BEC(epsilon) capacity (bits) and dispersion (bits**2); outputs 0, erasure, 1."""
    e = _check_param("bec", epsilon)
    return discrete_capacity_dispersion([[1 - e, e, 0.0], [0.0, e, 1 - e]])


# Sums below use (a * b).sum() rather than np.dot: a BLAS call on 1-D arrays can cost
# milliseconds when its threads compete with other processes, 1000x the work itself.
def _biawgn_density_grid(sigma: float, half_width: float = 40.0, step: float = 0.005):
    """Trapezoid nodes t, weights phi(t) dt, and LLRs L = mu + sqrt(2 mu) t for L ~ N(mu, 2 mu)."""
    t = np.arange(-half_width, half_width + step / 2, step)
    wts = np.exp(-0.5 * t * t) * (step / math.sqrt(2.0 * math.pi))
    mu = 2.0 / (sigma * sigma)
    return t, wts, mu + math.sqrt(2.0 * mu) * t


def biawgn_capacity_dispersion(sigma: float, method: str = "quad") -> tuple[float, float]:
    """BI-AWGN capacity (bits) and dispersion (bits**2) at noise standard deviation ``sigma``.

    Moments of the information density ``i = 1 - log2(1 + e^{-L})`` with the
    channel LLR ``L ~ N(2/sigma**2, 4/sigma**2)`` given that +1 was sent.

    Parameters
    ----------
    sigma : float
        Noise standard deviation per real dimension (BPSK +-1).
    method : {"quad", "trapezoid"}
        Adaptive Gauss-Kronrod quadrature (``scipy.integrate.quad``) or the
        trapezoid rule on a step-0.005 grid over +-40 standard deviations; two
        independent evaluations of the same integrals.
    """
    s = float(sigma)
    if not (math.isfinite(s) and s > 0):
        raise InputError(f"sigma must be a positive number; got {sigma!r}.")
    if method == "trapezoid":
        _, wts, L = _biawgn_density_grid(s)
        dens = 1.0 - np.logaddexp(0.0, -L) / _LN2
        m1 = float((wts * dens).sum())
        m2 = float((wts * dens * dens).sum())
        return m1, max(m2 - m1 * m1, 0.0)
    if method != "quad":
        raise InputError(f"method must be 'quad' or 'trapezoid'; got {method!r}.")
    mu = 2.0 / (s * s)
    sd = math.sqrt(2.0 * mu)

    def moment(power):
        def f(t):
            v = 1.0 - float(np.logaddexp(0.0, -(mu + sd * t))) / _LN2
            return math.exp(-0.5 * t * t) * v ** power

        val, _ = integrate.quad(f, -40.0, 40.0, points=[-mu / sd, 0.0],
                                epsabs=1e-15, epsrel=1e-13, limit=500)
        return val / math.sqrt(2.0 * math.pi)

    m1 = moment(1)
    m2 = moment(2)
    return m1, max(m2 - m1 * m1, 0.0)


def capacity_dispersion(channel: str, param: float, rate: float | None = None):
    """Capacity (bits) and dispersion (bits**2) of ``channel`` at ``param``.

    ``awgn`` needs ``rate`` (``param`` is Eb/N0 in dB); ``bsc``/``bec`` take p / epsilon.
    """
    channel = _check_channel(channel)
    v = _check_param(channel, param)
    if channel == "awgn":
        if rate is None:
            raise InputError("The AWGN capacity at a given Eb/N0 needs the code rate.")
        return biawgn_capacity_dispersion(awgn_sigma(v, rate))
    if channel == "bsc":
        return bsc_capacity_dispersion(v)
    return bec_capacity_dispersion(v)


# ------------------------------------------------------- normal approximation
def normal_approximation(channel: str, param: float, n: int, k: int) -> float:
    """Normal approximation of the smallest FER at length n and k information bits.

    ``eps = Q((n C - k + 1/2 log2 n) / sqrt(n V))`` (Polyanskiy, Poor & Verdu 2010),
    C in bits and V in bits**2 at ``param`` (awgn: Eb/N0 dB with R = k/n; bsc: p;
    bec: erasure probability). For V = 0 the result is 0 or 1.
    """
    n, k = _check_nk(n, k)
    C, V = capacity_dispersion(channel, param, rate=k / n)
    num = n * C - k + 0.5 * math.log2(n)
    if V <= 0.0:
        return 0.0 if num >= 0 else 1.0
    return float(special.ndtr(-num / math.sqrt(n * V)))


# ------------------------------------------------------------------- RCU
def _rcu_bsc(p: float, n: int, k: int) -> float:
    # eps <= sum_t B(t; n, p) min(1, (M - 1) 2^-n sum_{s <= t} C(n, s))
    t = np.arange(n + 1)
    with np.errstate(divide="ignore", invalid="ignore"):
        log_pt = (special.gammaln(n + 1) - special.gammaln(t + 1) - special.gammaln(n - t + 1)
                  + np.where(t > 0, t * math.log(p) if p > 0 else -np.inf, 0.0)
                  + np.where(n - t > 0, (n - t) * math.log1p(-p), 0.0))
    log_comb = special.gammaln(n + 1) - special.gammaln(t + 1) - special.gammaln(n - t + 1)
    log_cdf_half = np.logaddexp.accumulate(log_comb) - n * _LN2
    log_m1 = k * _LN2 + math.log1p(-(2.0 ** -k))
    inner = np.minimum(0.0, log_m1 + log_cdf_half)
    return float(min(1.0, math.exp(special.logsumexp(log_pt + inner))))


def _rcu_bec(e: float, n: int, k: int) -> float:
    # eps <= sum_t B(t; n, e) min(1, (M - 1) 2^(t - n))
    t = np.arange(n + 1)
    with np.errstate(divide="ignore", invalid="ignore"):
        log_pt = (special.gammaln(n + 1) - special.gammaln(t + 1) - special.gammaln(n - t + 1)
                  + np.where(t > 0, t * (math.log(e) if e > 0 else -np.inf), 0.0)
                  + np.where(n - t > 0, (n - t) * (math.log1p(-e) if e < 1 else -np.inf), 0.0))
    log_m1 = k * _LN2 + math.log1p(-(2.0 ** -k))
    inner = np.minimum(0.0, log_m1 + (t - n) * _LN2)
    return float(min(1.0, math.exp(special.logsumexp(log_pt + inner))))


class _LetterCGF:
    """Cumulant generating function of the per-letter i_s (nats) on the trapezoid grid."""

    def __init__(self, sigma: float, s: float):
        step = 0.01
        t, _, L = _biawgn_density_grid(sigma, half_width=60.0, step=step)
        self.x = _LN2 - np.logaddexp(0.0, -s * L)  # i_s(L), nats
        self.logw = -0.5 * t * t + math.log(step / math.sqrt(2.0 * math.pi))

    def moments(self, theta: float) -> tuple[float, float, float]:
        """K(theta), K'(theta), K''(theta)."""
        z = self.logw + theta * self.x
        K = float(special.logsumexp(z))
        p = np.exp(z - K)
        m = float((p * self.x).sum())
        v = float((p * (self.x - m) ** 2).sum())
        return K, m, v


def _mills(x: float) -> float:
    """Q(x) / phi(x), stable for large positive x."""
    return 0.5 * math.sqrt(2.0 * math.pi) * float(special.erfcx(x / math.sqrt(2.0)))


def _rcus_saddle_at(cgf: _LetterCGF, n: int, theta: float) -> tuple[float, float]:
    """(a, log RCU_s) for the threshold a = n K'(theta) (Lugannani-Rice on both terms)."""
    K, m1, var = cgf.moments(theta)
    a = n * m1
    K_m1, _, _ = cgf.moments(-1.0)
    sd = math.sqrt(n * var)
    w = math.copysign(math.sqrt(max(2.0 * (theta * a - n * K), 0.0)), theta)
    u = theta * sd
    tt = theta + 1.0
    wt = math.copysign(math.sqrt(max(2.0 * (tt * a - n * K + n * K_m1), 0.0)), tt)
    ut = tt * sd
    # P(S <= a) + e^a E[e^-S 1{S > a}] = phi(w) [M(-w) + 1/w - 1/u + M(wt) + 1/ut - 1/wt]
    bracket = _mills(-w) + 1.0 / w - 1.0 / u + _mills(wt) + 1.0 / ut - 1.0 / wt
    log_val = -0.5 * w * w - 0.5 * math.log(2.0 * math.pi) + math.log(max(bracket, 1e-300))
    return a, log_val


def _rcus_awgn_log(sigma: float, n: int, k: int, s: float) -> float:
    """log of the saddlepoint approximation of RCU_s (nats) at tilt s."""
    cgf = _LetterCGF(sigma, s)
    a = k * _LN2 + math.log1p(-(2.0 ** -k))  # log(M - 1)
    if a / n >= float(cgf.x.max()) - 1e-12:
        return 0.0

    def g(th):
        return n * cgf.moments(th)[1] - a

    lo, hi = -1.0, 1.0
    while g(lo) > 0:
        lo *= 2.0
        if lo < -1e4:
            return 0.0
    while g(hi) < 0:
        hi *= 2.0
        if hi > 1e4:
            return 0.0
    theta = optimize.brentq(g, lo, hi, xtol=1e-12, rtol=1e-12)
    delta = 2e-3
    singular = [c for c in (0.0, -1.0) if abs(theta - c) < delta]
    if singular:
        # 1/w - 1/u is 0/0 at theta = 0 and theta = -1: interpolate in a across the gap
        c = singular[0]
        a1, l1 = _rcus_saddle_at(cgf, n, c - delta)
        a2, l2 = _rcus_saddle_at(cgf, n, c + delta)
        val = l1 + (l2 - l1) * (a - a1) / (a2 - a1)
    else:
        _, val = _rcus_saddle_at(cgf, n, theta)
    return min(val, 0.0)


def rcu(channel: str, param: float, n: int, k: int) -> float:
    """Random-coding union bound on the ML frame error probability (achievability).

    Exact for ``bsc`` and ``bec`` (Polyanskiy, Poor & Verdu 2010); for
    ``awgn`` (Eb/N0 dB) the saddlepoint approximation of RCU_s with the tilt
    ``s`` in (0, 1] minimised (RCU_s >= RCU). See the module notes.
    """
    n, k = _check_nk(n, k)
    channel = _check_channel(channel)
    v = _check_param(channel, param)
    if channel == "bsc":
        return _rcu_bsc(v, n, k)
    if channel == "bec":
        return _rcu_bec(v, n, k)
    sigma = awgn_sigma(v, k / n)
    res = optimize.minimize_scalar(lambda s: _rcus_awgn_log(sigma, n, k, s),
                                   bounds=(0.05, 1.0), method="bounded",
                                   options={"xatol": 1e-4})
    best = min(float(res.fun), _rcus_awgn_log(sigma, n, k, 1.0))
    return float(math.exp(best))


# ---------------------------------------------------------- sphere packing
def _log_cone_exit(n: int, amplitude: float, theta: float) -> float:
    """log P(sqrt(n) A + Z < cot(theta) R), Z ~ N(0,1), R ~ chi_{n-1} (theta in (0, pi/2]).

    The probability that noise moves a codeword at distance ``sqrt(n) A`` out of
    the cone of half-angle ``theta`` around it (``A = 1/sigma``).
    """
    cot = math.cos(theta) / math.sin(theta)
    return _log_chi_expectation(n - 1, cot, -math.sqrt(n) * amplitude)


def _log_cone_share(n: int, theta: float) -> float:
    """log of the share of the unit sphere in R^n inside a cone of half-angle theta <= pi/2."""
    cot = math.cos(theta) / math.sin(theta)
    return _log_chi_expectation(n - 1, -cot, 0.0)


def _log_chi_expectation(nu: int, slope: float, offset: float) -> float:
    """log E[Phi(slope R + offset)] for R ~ chi_nu, in the log domain.

    Integrated over u = ln r, where the integrand ``f_chi(e^u) e^u Phi(.)`` is
    smooth and decays fast at both ends, so the trapezoid rule converges
    geometrically; u runs from ln 1e-13 (the chi_nu mass below is < 1e-13**nu)
    to ln(sqrt(nu) + 40) on 60000 nodes (the peak, of width about
    1/sqrt(2 nu) in u, gets several nodes even for nu = 1e5).
    """
    u = np.linspace(math.log(1e-13), math.log(math.sqrt(nu) + 40.0), 60000)
    r = np.exp(u)
    logf = (nu * u - 0.5 * r * r - (0.5 * nu - 1.0) * _LN2 - special.gammaln(0.5 * nu))
    vals = logf + special.log_ndtr(slope * r + offset)
    du = u[1] - u[0]
    lw = np.full(u.shape, math.log(du))
    lw[0] = lw[-1] = math.log(du / 2)
    return float(special.logsumexp(vals + lw))


def log_sphere_packing_1959(ebn0_db: float, n: int, k: int) -> float:
    """Natural log of :func:`sphere_packing_1959` (finite far below 1e-308)."""
    n, k = _check_nk(n, k)
    v = _check_param("awgn", ebn0_db)
    amp = 1.0 / awgn_sigma(v, k / n)
    log_target = -k * _LN2  # share of the sphere per codeword = 1/M
    theta = optimize.brentq(lambda th: _log_cone_share(n, th) - log_target,
                            1e-9, math.pi / 2, xtol=1e-14, rtol=1e-13)
    return _log_cone_exit(n, amp, theta)


def sphere_packing_1959(ebn0_db: float, n: int, k: int) -> float:
    """Shannon's 1959 sphere-packing lower bound on the FER of equal-energy codes on AWGN.

    Parameters
    ----------
    ebn0_db : float
        Eb/N0 in dB, with rate ``R = k/n`` (BPSK, unit symbol energy).
    n, k : int
        Block length (real dimensions) and information bits.

    Returns
    -------
    float
        ``Q_n(theta_n, A)``: the probability that Gaussian noise moves the
        codeword out of a cone of half-angle ``theta_n`` whose share of the
        sphere is ``1/M``; ``A = sqrt(2 Es/N0)``. No code with ``2**k`` words of
        equal energy in ``n`` dimensions has a lower error probability (Shannon 1959).
    """
    return float(math.exp(log_sphere_packing_1959(ebn0_db, n, k)))


# ------------------------------------------------------------------ summary
@dataclass
class FiniteLengthLimits:
    """Finite-length figures at one channel parameter (frame error probabilities).

    Attributes
    ----------
    channel : str
        ``"awgn"``, ``"bsc"`` or ``"bec"``.
    param : float
        Eb/N0 in dB (awgn), crossover p (bsc) or erasure probability (bec).
    n, k : int
    normal_approximation : float
    rcu : float
    sphere_packing : float or None
        Shannon 1959 (awgn only).
    capacity : float
        Bits per channel use at ``param``.
    dispersion : float
        Bits**2 per channel use.
    rcu_method : str
    """

    channel: str
    param: float
    n: int
    k: int
    normal_approximation: float
    rcu: float
    sphere_packing: float | None
    capacity: float
    dispersion: float
    rcu_method: str

    def to_dict(self) -> dict:
        return asdict(self)


def finite_length_limits(channel: str, param: float, n: int, k: int) -> FiniteLengthLimits:
    """Normal approximation, RCU and (AWGN) sphere-packing FER at one channel parameter.

    See the module docstring for definitions, units and references.
    """
    n, k = _check_nk(n, k)
    channel = _check_channel(channel)
    v = _check_param(channel, param)
    C, V = capacity_dispersion(channel, v, rate=k / n)
    return FiniteLengthLimits(
        channel=channel, param=v, n=n, k=k,
        normal_approximation=normal_approximation(channel, v, n, k),
        rcu=rcu(channel, v, n, k),
        sphere_packing=sphere_packing_1959(v, n, k) if channel == "awgn" else None,
        capacity=C, dispersion=V,
        rcu_method=("saddlepoint approximation of RCU_s (>= RCU)" if channel == "awgn"
                    else "exact"),
    )


def limit_curves(channel: str, params, n: int, k: int) -> dict[str, np.ndarray]:
    """The three figures over several channel parameters, for plotting.

    Returns a dict with ``"param"`` and one float64 array per figure
    (``sphere_packing`` is all NaN off AWGN).
    """
    params = np.asarray(list(params), dtype=np.float64)
    out = {"param": params}
    rows = [finite_length_limits(channel, p, n, k) for p in params]
    out["normal_approximation"] = np.array([r.normal_approximation for r in rows])
    out["rcu"] = np.array([r.rcu for r in rows])
    out["sphere_packing"] = np.array([np.nan if r.sphere_packing is None else r.sphere_packing
                                      for r in rows])
    return out

