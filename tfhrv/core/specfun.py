"""The few special functions and FFT lengths the record pipeline needs, in numpy and math.

Written out so that ``tfhrv scan``, ``inspect``, ``circadian`` and ``report`` do not import
SciPy: importing any ``scipy`` submodule costs about 0.3-0.4 s in a fresh process (issue
#16), for a normal quantile, Student t probabilities of integer degrees of freedom, the F
tail of the cosinor tests (even numerator degrees of freedom), the digamma and trigamma
functions and the 5-smooth FFT lengths.  Each function agrees with its SciPy namesake to a
few units in the last place (``tests/test_specfun.py`` checks against SciPy over wide
argument grids and against exact values).

References
----------
Abramowitz M, Stegun IA (eds). Handbook of Mathematical Functions. National Bureau of
Standards, Applied Mathematics Series 55, 1964 (6.3.18, 6.4.12, 26.2.2, 26.5.8, 26.6.4,
26.7.3, 26.7.4).
Wichura MJ. Algorithm AS 241: the percentage points of the normal distribution. J R Stat
Soc C 1988;37:477-484. doi:10.2307/2347330
Bernardo JM. Algorithm AS 103: psi (digamma) function. J R Stat Soc C 1976;25:315-317.
doi:10.2307/2347257
Schneider BE. Algorithm AS 121: trigamma function. J R Stat Soc C 1978;27:97-99.
doi:10.2307/2346249
Cooley JW, Tukey JW. An algorithm for the machine calculation of complex Fourier series.
Math Comput 1965;19:297-301. doi:10.1090/S0025-5718-1965-0178586-1
Lentz WJ. Generating Bessel functions in Mie scattering calculations using continued
fractions. Appl Opt 1976;15:668-671. doi:10.1364/AO.15.000668
"""

from __future__ import annotations

import functools
import math
from statistics import NormalDist

import numpy as np

__all__ = ["digamma", "fdtrc", "fdtri", "next_fast_len", "ndtr", "ndtri", "ndtri_array",
           "prev_fast_len", "stdtr", "stdtrit", "trigamma"]

#: Bernoulli numbers B_2, B_4, ..., B_14 (Abramowitz & Stegun 1964, table 23.2).
_BERNOULLI = (1 / 6, -1 / 30, 1 / 42, -1 / 30, 5 / 66, -691 / 2730, 7 / 6)
#: Arguments below this are moved up by the recurrence before the asymptotic series;
#: at x >= 10 the first omitted term (B_16 / x^16 or B_16 / x^17) is below 1e-16 relative.
_ASYMPTOTIC_FROM = 10.0
_EPS = np.finfo(np.float64).eps


# --------------------------------------------------------------------------- normal


def ndtr(x: float) -> float:
    """Standard normal cumulative distribution function Phi(x).

    Phi(x) = erfc(-x / sqrt 2) / 2 (Abramowitz & Stegun 1964, 26.2.2 with 7.1.2), through
    :func:`math.erfc`, so the lower tail keeps its relative precision.

    Examples
    --------
    >>> ndtr(0.0), round(ndtr(1.959963984540054), 12)
    (0.5, 0.975)
    """
    return 0.5 * math.erfc(-float(x) / math.sqrt(2.0))


def ndtri(p: float) -> float:
    """Standard normal quantile Phi^-1(p), 0 < p < 1.

    :class:`statistics.NormalDist` implements Wichura's (1988) algorithm AS 241 (PPND16,
    relative accuracy about 1e-16).

    Raises
    ------
    ValueError
        If ``p`` is not strictly between 0 and 1.

    Examples
    --------
    >>> round(ndtri(0.975), 12)
    1.95996398454
    """
    p = float(p)
    if not 0.0 < p < 1.0:
        raise ValueError(f"p must be in (0, 1), got {p!r}")
    return NormalDist().inv_cdf(p)


#: Wichura (1988) AS 241 (PPND16) coefficients, highest power first: numerator and
#: denominator for |p - 1/2| <= 0.425, for r = sqrt(-log min(p, 1 - p)) <= 5 and beyond.
_AS241 = (
    ((2.5090809287301226727e+3, 3.3430575583588128105e+4, 6.7265770927008700853e+4,
      4.5921953931549871457e+4, 1.3731693765509461125e+4, 1.9715909503065514427e+3,
      1.3314166789178437745e+2, 3.3871328727963666080e+0),
     (5.2264952788528545610e+3, 2.8729085735721942674e+4, 3.9307895800092710610e+4,
      2.1213794301586595867e+4, 5.3941960214247511077e+3, 6.8718700749205790830e+2,
      4.2313330701600911252e+1, 1.0)),
    ((7.7454501427834140764e-4, 2.2723844989269184583e-2, 2.4178072517745061177e-1,
      1.2704582524523683826e+0, 3.6478483247632046050e+0, 5.7694972214606914055e+0,
      4.6303378461565452959e+0, 1.4234371107496835773e+0),
     (1.0507500716444168432e-9, 5.4759380849953449460e-4, 1.5198666563616457197e-2,
      1.4810397642748007459e-1, 6.8976733498510000455e-1, 1.6763848301838038494e+0,
      2.0531916266377588219e+0, 1.0)),
    ((2.0103343992922881327e-7, 2.7115555687434875782e-5, 1.2426609473880784386e-3,
      2.6532189526576123093e-2, 2.9656057182850489123e-1, 1.7848265399172913358e+0,
      5.4637849111641143699e+0, 6.6579046435011037772e+0),
     (2.0442631033899397856e-15, 1.4215117583164458887e-7, 1.8463183175100546818e-5,
      7.8686913114561329059e-4, 1.4875361290850614853e-2, 1.3692988092273580531e-1,
      5.9983220655588793769e-1, 1.0)),
)


def ndtri_array(p) -> np.ndarray:
    """Standard normal quantile Phi^-1(p) of every element of an array, 0 < p < 1.

    Wichura's (1988) algorithm AS 241 (PPND16, relative accuracy about 1e-16), the
    algorithm of :func:`ndtri`, evaluated on whole arrays.

    Raises
    ------
    ValueError
        If an element is not strictly between 0 and 1.

    References
    ----------
    Wichura MJ. Algorithm AS 241: the percentage points of the normal distribution.
    Appl Stat 1988;37:477-484. doi:10.2307/2347330

    Examples
    --------
    >>> [round(float(v), 12) for v in ndtri_array([0.025, 0.5, 0.975])]
    [-1.95996398454, 0.0, 1.95996398454]
    """
    p = np.asarray(p, dtype=np.float64)
    if not np.all((p > 0.0) & (p < 1.0)):
        raise ValueError("p must be in (0, 1) everywhere")
    q = p - 0.5
    out = np.empty_like(p)
    central = np.abs(q) <= 0.425
    if central.any():
        qc = q[central]
        r = 0.180625 - qc * qc
        num, den = (np.polyval(c, r) for c in _AS241[0])
        out[central] = qc * num / den
    tail = ~central
    if tail.any():
        qt = q[tail]
        r = np.sqrt(-np.log(np.where(qt < 0.0, p[tail], 1.0 - p[tail])))
        near = r <= 5.0
        x = np.empty_like(r)
        for part, shift, coef in ((near, 1.6, _AS241[1]), (~near, 5.0, _AS241[2])):
            if part.any():
                rr = r[part] - shift
                x[part] = np.polyval(coef[0], rr) / np.polyval(coef[1], rr)
        out[tail] = np.where(qt < 0.0, -x, x)
    return out


# --------------------------------------------------------------------------- Student t


def _check_dof(dof) -> int:
    if isinstance(dof, bool) or int(dof) != dof or dof < 1:
        raise ValueError(f"dof must be an integer >= 1, got {dof!r}")
    return int(dof)


def _t_central(k: int, t: float) -> float:
    """A(t | k) = P(|T_k| <= t), t >= 0, in closed form (A & S 1964, 26.7.3 and 26.7.4)."""
    r = math.hypot(t, math.sqrt(k))
    sin, cos2 = t / r, k / (r * r)  # theta = atan(t / sqrt k): sin(theta), cos(theta)^2
    if k % 2 == 0:  # 26.7.4: sin(theta) [1 + 1/2 c^2 + 1.3/(2.4) c^4 + ... (k-2 power)]
        term, total = 1.0, 1.0
        for j in range(1, k // 2):
            term *= cos2 * (2 * j - 1) / (2 * j)
            total += term
        return sin * total
    theta = math.atan2(t, math.sqrt(k))
    if k == 1:
        return 2.0 * theta / math.pi
    # 26.7.3: (2/pi) [theta + sin cos (1 + 2/3 c^2 + 2.4/(3.5) c^4 + ... (k-3 power))]
    term, total = 1.0, 1.0
    for j in range(1, (k - 1) // 2):
        term *= cos2 * (2 * j) / (2 * j + 1)
        total += term
    return 2.0 / math.pi * (theta + sin * math.sqrt(cos2) * total)


def _beta_cf(a: float, b: float, x: float) -> float:
    """Continued fraction of I_x(a, b) (A & S 1964, 26.5.8), by the modified Lentz (1976)
    method; converges fast for x < (a + 1) / (a + b + 2)."""
    tiny = 1e-300
    c, d = 1.0, 1.0 - (a + b) * x / (a + 1.0)
    d = 1.0 / (d if abs(d) > tiny else tiny)
    h = d
    for m in range(1, 10_000):
        m2 = 2 * m
        for num in (m * (b - m) * x / ((a + m2 - 1.0) * (a + m2)),
                    -(a + m) * (a + b + m) * x / ((a + m2) * (a + m2 + 1.0))):
            d = 1.0 + num * d
            d = 1.0 / (d if abs(d) > tiny else tiny)
            c = 1.0 + num / c
            c = c if abs(c) > tiny else tiny
            h *= d * c
        if abs(d * c - 1.0) < _EPS:
            return h
    raise ArithmeticError(f"incomplete beta continued fraction did not converge "
                          f"(a={a!r}, b={b!r}, x={x!r})")  # pragma: no cover


def _t_tail(k: int, t: float) -> float:
    """P(T_k > t) for t >= 0, with full relative precision also far in the tail."""
    # P(T > t) = I_x(k/2, 1/2) / 2, x = k / (k + t^2) (26.7.1 with 26.5.27)
    a, b = 0.5 * k, 0.5
    r2 = k + t * t
    x, y = k / r2, t * t / r2
    if x >= (a + 1.0) / (a + b + 2.0):  # t^2 < about 3: the tail is > 0.04, no cancellation
        return 0.5 * (1.0 - _t_central(k, t))
    # farther out 1 - A would cancel digits: the continued fraction 26.5.8 of I_x, which
    # converges fast for x < (a + 1) / (a + b + 2), keeps the tail's relative precision
    log_front = (a * math.log(x) + b * math.log(y) - math.log(a)
                 - (math.lgamma(a) + math.lgamma(b) - math.lgamma(a + b)))
    return 0.5 * math.exp(log_front) * _beta_cf(a, b, x)


def stdtr(dof: int, t: float) -> float:
    """Student t cumulative distribution function P(T_dof <= t), integer ``dof`` >= 1.

    The closed forms of Abramowitz & Stegun (1964) 26.7.3 (odd dof) and 26.7.4 (even dof);
    farther in the tail (t^2 above about 3), where their ``1 - A`` would cancel digits, the
    continued fraction of the incomplete beta function (26.5.8, Lentz 1976), so both tails
    keep their relative precision.  Relative error below 1e-13 for dof <= 30 and about
    dof x 1e-15 above (the closed form sums dof / 2 terms; ln B(dof/2, 1/2) comes from
    :func:`math.lgamma`).

    Raises
    ------
    ValueError
        If ``dof`` is not an integer >= 1.

    Examples
    --------
    >>> stdtr(1, 1.0), stdtr(2, 0.0)
    (0.75, 0.5)
    """
    k = _check_dof(dof)
    t = float(t)
    if math.isnan(t):
        return math.nan
    if math.isinf(t):
        return 1.0 if t > 0 else 0.0
    tail = _t_tail(k, abs(t))
    return 1.0 - tail if t > 0 else tail


def _t_density(k: int, t: float) -> float:
    log_c = math.lgamma(0.5 * (k + 1)) - math.lgamma(0.5 * k) - 0.5 * math.log(k * math.pi)
    return math.exp(log_c - 0.5 * (k + 1) * math.log1p(t * t / k))


@functools.lru_cache(maxsize=256)  # callers ask for a few (dof, 0.975) pairs over and over
def _stdtrit(k: int, p: float) -> float:
    sign, q = (1.0, 1.0 - p) if p > 0.5 else (-1.0, p)  # solve P(T > t) = q, t > 0
    if k == 1:  # tan(pi (p - 1/2)) = cot(pi q) for the upper tail q = 1 - p
        return sign / math.tan(math.pi * q)
    if k == 2:  # (2p - 1) / sqrt(2 p (1 - p)) written with the tail q
        return sign * (1.0 - 2.0 * q) / math.sqrt(2.0 * q * (1.0 - q))
    z = -NormalDist().inv_cdf(q)
    g1 = (z**3 + z) / 4.0
    g2 = (5 * z**5 + 16 * z**3 + 3 * z) / 96.0
    t = max(z + g1 / k + g2 / k**2, 1e-300)
    lo, hi = 0.0, math.inf  # P(T > lo) > q > P(T > hi)
    log_q = math.log(q)
    last = math.inf
    for _ in range(200):
        tail = _t_tail(k, t)
        if tail > q:
            lo = t
        else:
            hi = t
        step = (math.log(tail) - log_q) * tail / _t_density(k, t)  # d log(tail)/dt = -f/tail
        new = t + step
        if not lo < new < hi:  # Newton left the bracket: bisect (geometric while unbounded)
            new = 2.0 * t if math.isinf(hi) else 0.5 * (lo + hi)
        change = abs(new - t)
        # converged: a step of a few units in the last place, or a step no smaller than the
        # last one (the rounding noise of the tail probability is reached)
        if change <= 4.0 * _EPS * abs(new) or (change >= last and change < 1e-14 * abs(new)):
            return sign * new
        last = change
        t = new
    raise ArithmeticError(f"stdtrit did not converge (dof={k!r}, p={p!r})")  # pragma: no cover


def stdtrit(dof: int, p: float) -> float:
    """Student t quantile: the t with P(T_dof <= t) = p, integer ``dof`` >= 1, 0 < p < 1.

    Exact for dof 1 (``tan(pi (p - 1/2))``) and dof 2 (``(2p - 1) / sqrt(2 p (1 - p))``);
    otherwise Newton's method on the logarithm of the tail probability of :func:`stdtr`,
    started from the Cornish-Fisher expansion about the normal quantile (Abramowitz &
    Stegun 1964, 26.7.5) and kept inside a shrinking bracket, until the step is a few units
    in the last place (or stops shrinking at the rounding noise of the tail).  Results are
    cached: the pipeline asks for the same few (dof, 0.975) pairs thousands of times.

    Raises
    ------
    ValueError
        If ``dof`` is not an integer >= 1 or ``p`` is not in (0, 1).

    Examples
    --------
    >>> round(stdtrit(1, 0.975), 12), round(stdtrit(30, 0.975), 12)
    (12.706204736175, 2.042272456301)
    """
    k = _check_dof(dof)
    p = float(p)
    if not 0.0 < p < 1.0:
        raise ValueError(f"p must be in (0, 1), got {p!r}")
    if p == 0.5:
        return 0.0
    return _stdtrit(k, p)


# --------------------------------------------------------------------------- F distribution


def fdtrc(dfn: int, dfd: int, x: float) -> float:
    """F survival function P(F_{dfn, dfd} > x) for even integer ``dfn`` and integer ``dfd``.

    Finite sum of Abramowitz & Stegun (1964) 26.6.4: with y = dfd / (dfd + dfn x),
    Q = y^(dfd/2) [1 + (dfd/2)(1 - y) + (dfd/2)(dfd/2 + 1)/2! (1 - y)^2 + ... ] with dfn/2
    terms; all terms are positive, so Q keeps its relative precision far in the tail.
    (The cosinor tests use dfn = 2 and 4.)

    Raises
    ------
    ValueError
        If ``dfn`` is not an even integer >= 2 or ``dfd`` not an integer >= 1.

    Examples
    --------
    >>> fdtrc(2, 10, 0.0), round(fdtrc(2, 10, 3.0), 12)  # (1 + 2x/10)^-5
    (1.0, 0.095367431641)
    """
    m = _check_dof(dfn)
    if m % 2:
        raise ValueError(f"dfn must be an even integer, got {dfn!r}")
    d = _check_dof(dfd)
    x = float(x)
    if math.isnan(x):
        return math.nan
    if x <= 0.0:
        return 1.0
    if math.isinf(x):
        return 0.0
    one_minus = m * x / (d + m * x)  # 1 - y
    term, total = 1.0, 1.0
    for j in range(1, m // 2):
        term *= (0.5 * d + j - 1) / j * one_minus
        total += term
    return math.exp(-0.5 * d * math.log1p(m * x / d)) * total  # y^(d/2) = (1 + m x/d)^(-d/2)


def fdtri(dfn: int, dfd: int, p: float) -> float:
    """F quantile: the x with P(F_{dfn, dfd} <= x) = p, for ``dfn`` = 2 (closed form).

    From :func:`fdtrc` with dfn = 2, 1 - p = (1 + 2x/dfd)^(-dfd/2), so
    x = (dfd / 2) expm1(-(2 / dfd) log(1 - p)).

    Raises
    ------
    ValueError
        If ``dfn`` is not 2, ``dfd`` not an integer >= 1 or ``p`` not in [0, 1).

    Examples
    --------
    >>> round(fdtri(2, 10, 0.95), 10)  # F(0.95; 2, 10), A & S table 26.9
    4.1028210151
    """
    if dfn != 2:
        raise ValueError(f"fdtri is written for dfn = 2 only, got {dfn!r}")
    d = _check_dof(dfd)
    p = float(p)
    if not 0.0 <= p < 1.0:
        raise ValueError(f"p must be in [0, 1), got {p!r}")
    return 0.5 * d * math.expm1(-(2.0 / d) * math.log1p(-p))


# --------------------------------------------------------------------------- psi functions


def _positive_array(x, name: str) -> np.ndarray:
    arr = np.asarray(x, dtype=np.float64)
    if not np.all(arr > 0):  # also refuses NaN
        raise ValueError(f"{name} must be > 0 everywhere, got {arr.ravel()[:5].tolist()!r}")
    return arr


#: Coefficients of the asymptotic series in powers of 1/z^2: B_2n / (2n) for digamma
#: (A & S 6.3.18), B_2n for trigamma (6.4.12), n = 1..7.
_DIGAMMA_COEF = np.array([b / (2 * n) for n, b in enumerate(_BERNOULLI, start=1)])
_TRIGAMMA_COEF = np.array(_BERNOULLI)


def _powers(inv2: np.ndarray) -> np.ndarray:
    """(1, w, w^2, ..., w^6) along a last axis, w = 1/z^2 (so that the series is one
    product with its coefficients instead of a loop of array operations)."""
    return inv2[..., None] ** np.arange(len(_BERNOULLI))


def _shift_up(z: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Arguments moved to ``z + m >= 10`` (m = 0, 1, ..., 10 steps of 1) and the terms
    ``z, z + 1, ..., z + m - 1`` of the recurrence (``inf`` pads the unused ones)."""
    steps = np.ceil(np.maximum(_ASYMPTOTIC_FROM - z, 0.0))
    j = np.arange(int(_ASYMPTOTIC_FROM))
    terms = z[..., None] + j
    terms[j >= steps[..., None]] = np.inf
    return z + steps, terms


def digamma(x):
    """Digamma function psi(x) = d ln Gamma(x) / dx for x > 0 (array or scalar).

    The recurrence psi(x) = psi(x + 1) - 1/x (Abramowitz & Stegun 1964, 6.3.5) moves every
    argument to x >= 10, where the asymptotic series 6.3.18 up to the B_14 term is exact to
    rounding; the same scheme as Bernardo's (1976) algorithm AS 103 with more terms.

    Raises
    ------
    ValueError
        If any argument is not > 0.

    Examples
    --------
    >>> round(float(digamma(1.0)), 12)  # minus the Euler-Mascheroni constant
    -0.577215664902
    """
    z, terms = _shift_up(_positive_array(x, "x"))
    shifted = (1.0 / terms).sum(axis=-1)  # 1/x + 1/(x+1) + ... (0 where no shift)
    inv2 = 1.0 / (z * z)
    series = _powers(inv2) @ _DIGAMMA_COEF  # sum_n B_2n / (2n) z^(-2n+2)
    out = np.log(z) - 0.5 / z - series * inv2 - shifted
    return out if out.ndim else float(out)


def trigamma(x):
    """Trigamma function psi'(x) = d psi(x) / dx for x > 0 (array or scalar).

    The recurrence psi'(x) = psi'(x + 1) + 1/x^2 (6.4.6) to x >= 10, then the asymptotic
    series 6.4.12 up to the B_14 term; the scheme of Schneider's (1978) algorithm AS 121
    with more terms, exact to rounding.  psi'(x) is the Hurwitz zeta function zeta(2, x),
    which ``scipy.special.polygamma(1, x)`` evaluates.

    Raises
    ------
    ValueError
        If any argument is not > 0.

    Examples
    --------
    >>> bool(abs(trigamma(1.0) - math.pi**2 / 6) < 1e-15)
    True
    """
    z, terms = _shift_up(_positive_array(x, "x"))
    shifted = (1.0 / (terms * terms)).sum(axis=-1)  # 1/x^2 + 1/(x+1)^2 + ...
    inv2 = 1.0 / (z * z)
    series = _powers(inv2) @ _TRIGAMMA_COEF  # sum_n B_2n z^(-2n+2)
    out = (1.0 + (0.5 + series * inv2 * z) / z) / z + shifted
    return out if out.ndim else float(out)


# --------------------------------------------------------------------------- FFT lengths


def _check_length(n) -> int:
    if isinstance(n, bool) or int(n) != n or n < 1:
        raise ValueError(f"n must be an integer >= 1, got {n!r}")
    return int(n)


def next_fast_len(n: int) -> int:
    """Smallest 5-smooth number 2^a 3^b 5^c >= n (``scipy.fft.next_fast_len(n, real=True)``).

    Real FFTs of such lengths factor into radix 2, 3 and 5 passes (Cooley & Tukey 1965;
    the pocketfft code in NumPy and SciPy), so they run fast; exact integer arithmetic.

    Examples
    --------
    >>> next_fast_len(86401), next_fast_len(97)
    (87480, 100)
    """
    n = _check_length(n)
    best = 1 << (n - 1).bit_length()  # a power of two >= n
    p5 = 1
    while p5 < best:
        p35 = p5
        while p35 < best:
            q = -(-n // p35)  # ceil(n / p35): smallest power of two >= q completes it
            cand = p35 * (1 << (q - 1).bit_length())
            best = min(best, cand)
            p35 *= 3
        p5 *= 5
    return best


def prev_fast_len(n: int) -> int:
    """Largest 5-smooth number 2^a 3^b 5^c <= n (``scipy.fft.prev_fast_len(n, real=True)``).

    Examples
    --------
    >>> prev_fast_len(86401), prev_fast_len(97)
    (86400, 96)
    """
    n = _check_length(n)
    best = 1 << (n.bit_length() - 1)  # a power of two <= n
    p5 = 1
    while p5 <= n:
        p35 = p5
        while p35 <= n:
            best = max(best, p35 << ((n // p35).bit_length() - 1))
            p35 *= 3
        p5 *= 5
    return best
