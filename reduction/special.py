"""Special functions for the statistics of a fit, in pure Python (standard library ``math`` only).

The engine asks four questions of probability theory: the tail probability of a χ² value (the
p-value of an MSWD), the χ² quantiles (the MSWD acceptance limits), the Student-t quantile (the
multiplier of a 95 % confidence interval) and the normal quantile. This module answers them
without scipy, so that the engine also runs inside the Python that LibreOffice bundles.

Public functions
----------------
:func:`chi2_sf`     survival function of χ²:  Q(ν/2, x/2)      (scipy: ``special.chdtrc(ν, x)``)
:func:`chi2_isf`    its inverse in x                         (scipy: ``special.chdtri(ν, p)``)
:func:`t_ppf`       Student-t quantile                       (scipy: ``special.stdtrit(ν, p)``)
:func:`normal_ppf`  standard normal quantile                 (scipy: ``special.ndtri(p)``)

Every function takes plain numbers, returns a finite ``float`` and raises
:class:`~reduction.errors.InputError` (naming ``"x"``, ``"dof"`` or ``"p"``) for an argument out of
its domain (not a finite number, x < 0, dof < 1e-300, p outside (0, 1)), or
:class:`~reduction.errors.UndefinedResultError` for a quantile outside the normal doubles. A tail
probability below the smallest double (≈ 5e-324) is returned as 0.0, the correctly rounded value;
results below ≈ 2e-308 (subnormal) carry less than full precision.

Accuracy (measured against mpmath at 40–60 digits, see tests/engine/test_special.py): chi2_sf about
(2 + |ln sf|)·1e-16 relative, at most ~3e-13 in the far tails (the conditioning of e^−y for y ~ 700);
chi2_isf, t_ppf ≲ 1e-14; normal_ppf ≲ 5e-16 for p ≥ 1e-300. Python 3.8+, standard library only.

Methods (details in each function's docstring)
----------------------------------------------
* Incomplete gamma ratios P(a, y), Q(a, y) (y = x/2, a = ν/2); the smaller of the two is always
  computed directly, the larger as its complement:

  - whole and half-integer a ≤ 100 (ν ≤ 200), y ≥ a: the finite sums of Abramowitz & Stegun
    (1964) 26.4.4 (ν even) and 26.4.5 (ν odd, with erfc), all terms positive;
  - the power series of P and the continued fraction of Q (Lentz's method), Press et al. (2007),
    *Numerical Recipes*, 3rd ed., §6.2, with the prefactor yᵃe⁻ʸ/Γ(a+1) computed without
    cancellation as exp(a·(ln(1+u) − u))/(√(2πa)·Γ*(a)), u = (y − a)/a (Temme 1979, DiDonato &
    Morris 1986), Γ* the Stirling-series factor of Γ;
  - small a < 0.5 and y ≤ 1: Q = u + v with u = 1 − yᵃ/Γ(1+a) (DiDonato & Morris 1986);
  - large a > 100 near the centre (|η| ≤ 1): Temme's (1979) uniform asymptotic expansion
    Q = ½ erfc(η√(a/2)) + R_a(η), with the coefficients C_k(η) derived for this module from
    Temme's recursion (see :data:`_TEMME_C`).

* Student-t tail probabilities through the incomplete beta ratio I_x(ν/2, ½), x = ν/(ν + t²):
  the continued fraction of Numerical Recipes §6.4 (Lentz), and, for ν ≥ 50 in the tail, an
  expansion in incomplete gamma functions of half-integer order derived for this module (see
  :func:`_t_tail_expansion`, after Temme 1996, ch. 11).

* Quantiles: a start value (Wilson & Hilferty 1931 for χ², the Cornish–Fisher expansion of
  Abramowitz & Stegun 26.7.5 for t, Abramowitz & Stegun 26.2.23 for the normal, and the leading
  terms of the tails where those fail), then Halley steps (Press et al. 2007, §9.4) on the logarithm
  of the accurate tail probability, with the analytic density, safeguarded by a bracket.

References
----------
Abramowitz, M. & Stegun, I. A. (eds.) 1964, *Handbook of Mathematical Functions*, NBS Applied
Mathematics Series 55 (4.1.28, 6.1.33, 6.1.40, §6.5, 26.2.23, 26.4.4, 26.4.5, §26.7, 26.7.5).
DiDonato, A. R. & Morris, A. H. 1986, Computation of the incomplete gamma function ratios and their
inverse, ACM Trans. Math. Softw. 12, 377–393.
Lentz, W. J. 1976, Generating Bessel functions in Mie scattering calculations using continued
fractions, Appl. Opt. 15, 668–671 (modified by Thompson & Barnett 1986, J. Comput. Phys. 64, 490).
Press, W. H., Teukolsky, S. A., Vetterling, W. T. & Flannery, B. P. 2007, *Numerical Recipes*,
3rd ed., Cambridge University Press (§5.2, §6.2, §6.4, §9.4).
Temme, N. M. 1979, The asymptotic expansion of the incomplete gamma functions, SIAM J. Math. Anal.
10, 757–766; Temme, N. M. 1996, *Special Functions: An Introduction to the Classical Functions of
Mathematical Physics*, Wiley (§11.2.4).
Wilson, E. B. & Hilferty, M. M. 1931, The distribution of chi-square, Proc. Natl. Acad. Sci. 17,
684–688.
"""
from __future__ import annotations

import math
from typing import Callable, Optional, Tuple

from .errors import ConvergenceError, InputError, UndefinedResultError

__all__ = ["chi2_isf", "chi2_sf", "normal_ppf", "t_ppf"]

_EPS = 2.220446049250313e-16            # 2**-52
_TINY = 2.2250738585072014e-308         # smallest positive normal double
_FPMIN = 1e-300                         # Lentz's guard against a zero denominator
_LN2 = 0.6931471805599453
_LN_SQRT_2PI = 0.9189385332046728       # ln √(2π)
_SQRT_2PI = 2.5066282746310002
_SQRT_PI = 1.7724538509055160
_SQRT2 = 1.4142135623730951
_LN_PI = 1.1447298858494002
_EULER = 0.5772156649015329             # Euler's constant γ
_LOG_MAX = 709.782712893384             # ln(largest double)
_MIN_DOF = 1e-300
_MAXIT = 100000                         # series / continued-fraction terms (never reached in practice)


# --------------------------------------------------------------------------------------------
# argument checks
# --------------------------------------------------------------------------------------------
def _number(name: str, value: object) -> float:
    """``value`` as a finite float, else an InputError naming ``name``."""
    try:
        v = float(value)  # type: ignore[arg-type]
    except OverflowError:
        raise InputError(name, "is too large for double precision (beyond ~1.8e308)") from None
    except (TypeError, ValueError):
        text = repr(value)
        raise InputError(name, f"is not a number: {text if len(text) <= 60 else text[:57] + '...'}") from None
    if not math.isfinite(v):
        raise InputError(name, f"must be a finite number, got {v!r}")
    return v


def _half_dof(dof: object) -> float:
    """a = ν/2 for a valid number of degrees of freedom ν."""
    nu = _number("dof", dof)
    if not nu >= _MIN_DOF:
        raise InputError("dof", f"must be > 0 (at least 1e-300), got {nu!r}")
    return 0.5 * nu


def _probability(p: object) -> float:
    v = _number("p", p)
    if not 0.0 < v < 1.0:
        raise InputError("p", f"must lie strictly between 0 and 1, got {v!r}")
    return v


# --------------------------------------------------------------------------------------------
# elementary pieces
# --------------------------------------------------------------------------------------------
def _log1pmx(u: float) -> float:
    """ln(1 + u) − u for u > −1, accurate to a few ulps also for small |u|.

    For −0.5 ≤ u ≤ 1 the series ln(1 + u) = 2(r + r³/3 + r⁵/5 + …), r = u/(2 + u) (e.g. Abramowitz &
    Stegun 4.1.28), rearranged as ln(1 + u) − u = −r·u + 2r·Σ_{k≥1} r^{2k}/(2k + 1), since
    u − 2r = r·u: no two terms cancel, and |r| ≤ 1/3. Outside that range ``log1p(u) − u`` loses
    nothing.
    """
    if -0.5 <= u <= 1.0:
        r = u / (2.0 + u)
        r2 = r * r
        term = r2
        s = r2 / 3.0
        k = 5.0
        while True:
            term *= r2
            add = term / k
            s += add
            if add <= s * 1e-17:
                break
            k += 2.0
        return 2.0 * r * s - r * u
    return math.log1p(u) - u


# ln Γ*(a) = ln Γ(a) − (a − ½) ln a + a − ln √(2π) ~ Σ B_2k / (2k(2k − 1) a^(2k−1)) (Stirling; Abramowitz
# & Stegun 6.1.40). Eight terms reach 1e-17 for a ≥ 10.
_STIRLING = (1.0 / 12.0, -1.0 / 360.0, 1.0 / 1260.0, -1.0 / 1680.0, 1.0 / 1188.0, -691.0 / 360360.0,
             1.0 / 156.0, -3617.0 / 122400.0)


def _lgamma_star(a: float) -> float:
    """ln Γ*(a), the logarithm of Γ(a) / (√(2π) a^(a−½) e^(−a)), for a > 0.

    Stirling's series (Abramowitz & Stegun 6.1.40) for a ≥ 10, where it has absolute error below
    1e-17; below 10 from ``math.lgamma`` (absolute error a few 1e-16 there).
    """
    if a >= 10.0:
        w = 1.0 / (a * a)
        s = 0.0
        for c in reversed(_STIRLING):
            s = s * w + c
        return s / a
    return math.lgamma(a) - (a - 0.5) * math.log(a) + a - _LN_SQRT_2PI


# ζ(k), k = 2 … 19 (values to 17 digits; checked against mpmath.zeta in the tests); for k ≥ 20 the
# sum Σ_{n≤9} n^−k has relative error below 1e-19.
_ZETA = (1.6449340668482264, 1.2020569031595943, 1.0823232337111382, 1.0369277551433699, 1.0173430619844491,
         1.0083492773819228, 1.0040773561979443, 1.0020083928260822, 1.0009945751278181, 1.0004941886041195,
         1.0002460865533080, 1.0001227133475785, 1.0000612481350587, 1.0000305882363070, 1.0000152822594087,
         1.0000076371976379, 1.0000038172932650, 1.0000019082127166)
_ZETA_FULL = _ZETA + tuple(sum(n ** -float(k) for n in range(1, 10)) for k in range(20, 64))


def _lgamma1p_small(a: float) -> float:
    """ln Γ(1 + a) for 0 < a < 0.5 with small *relative* error.

    The Taylor series ln Γ(1 + a) = −γa + Σ_{k≥2} (−1)^k ζ(k) a^k / k (Abramowitz & Stegun 6.1.33, there
    with ln(1 + a) split off),
    summed until the terms fall below 1e-17 of the sum (at most 60 terms for a < 0.5).
    """
    s = -_EULER * a
    ak = -a
    for k, z in enumerate(_ZETA_FULL, start=2):
        ak *= -a
        term = z * ak / k
        s += term
        if abs(term) <= 1e-17 * abs(s):
            break
    return s


# --------------------------------------------------------------------------------------------
# incomplete gamma ratios P(a, y) and Q(a, y) = 1 − P(a, y)
# --------------------------------------------------------------------------------------------
def _phi(a: float, y: float) -> float:
    """φ(λ) = λ − 1 − ln λ ≥ 0 for λ = y/a > 0, without cancellation near λ = 1."""
    lam = y / a
    if 0.5 <= lam <= 2.0:
        return -_log1pmx((y - a) / a)       # y − a is exact here (Sterbenz)
    if lam >= _TINY:
        return lam - 1.0 - math.log(lam)
    return lam - 1.0 - (math.log(y) - math.log(a))


def _prefactor(a: float, y: float) -> float:
    """D(a, y) = yᵃ e⁻ʸ / Γ(a + 1), for a > 0, y > 0.

    For a ≥ 1, D = exp(−a·φ(y/a)) / (√(2πa)·Γ*(a)) (Temme 1979; DiDonato & Morris 1986): the large
    terms a·ln y and y are never subtracted. For a < 1 the direct form
    exp(a ln y − y − ln Γ(1 + a)) has no large terms to lose.
    """
    if a < 1.0:
        return math.exp(a * math.log(y) - y - math.lgamma(1.0 + a))
    e = -a * _phi(a, y)
    if e < -800.0:
        return 0.0
    return math.exp(e - _lgamma_star(a)) / math.sqrt(2.0 * math.pi * a)


def _p_series(a: float, y: float) -> float:
    """P(a, y) = D(a, y)·Σ_{n≥0} yⁿ / ((a+1)…(a+n)) (Numerical Recipes §6.2), for y < a + 1."""
    d = _prefactor(a, y)
    if d == 0.0:
        return 0.0
    s = term = 1.0
    ap = a
    for _ in range(_MAXIT):
        ap += 1.0
        term *= y / ap
        s += term
        if term <= s * 1e-17:
            return d * s
    raise ConvergenceError(f"incomplete gamma series did not converge (a={a!r}, y={y!r})")


def _lentz_step(an: float, bn: float, c: float, d: float) -> Tuple[float, float]:
    """One step of the modified Lentz method (Numerical Recipes §5.2): the new C_n and 1/D_n for the
    fraction's terms a_n, b_n, each guarded against a zero denominator."""
    d = an * d + bn
    if abs(d) < _FPMIN:
        d = _FPMIN
    c = bn + an / c
    if abs(c) < _FPMIN:
        c = _FPMIN
    return c, 1.0 / d


def _q_continued_fraction(a: float, y: float) -> float:
    """Q(a, y) from the continued fraction of Γ(a, y) (Numerical Recipes §6.2) evaluated by
    the modified Lentz method (Lentz 1976; Thompson & Barnett 1986; Numerical Recipes §5.2), y > 1."""
    d0 = _prefactor(a, y)
    if d0 == 0.0:
        return 0.0
    b = y + 1.0 - a
    c = 1.0 / _FPMIN
    d = 1.0 / b
    h = d
    i = 1.0
    for _ in range(_MAXIT):
        an = -i * (i - a)
        b += 2.0
        c, d = _lentz_step(an, b, c, d)
        delta = d * c
        h *= delta
        if abs(delta - 1.0) <= _EPS:
            return a * d0 * h           # e^-y y^a / Γ(a) = a·D(a, y)
        i += 1.0
    raise ConvergenceError(f"incomplete gamma continued fraction did not converge (a={a!r}, y={y!r})")


def _q_finite_sum(a: float, y: float) -> float:
    """Q(a, y) for a whole or half-integer a ≥ 1.5 by the finite sums of Abramowitz & Stegun 26.4.4
    (ν = 2a even: e⁻ʸ Σ_{j<a} yʲ/j!) and 26.4.5 (ν odd: erfc √y + e⁻ʸ Σ_{j=1}^{a−½} y^(j−½)/Γ(j+½)).
    Every term is positive; used for y ≥ a, y ≤ 700 (e⁻ʸ a normal number), a ≤ 100."""
    n = int(a)
    term = s = 1.0
    if a == n:
        for j in range(1, n):
            term *= y / j
            s += term
        return math.exp(-y) * s
    for j in range(1, n):
        term *= y / (j + 0.5)
        s += term
    sy = math.sqrt(y)
    return math.erfc(sy) + math.exp(-y) * (2.0 / _SQRT_PI) * sy * s


def _small_a(a: float, y: float, lny: float) -> Tuple[float, float]:
    """(P, Q) for 0 < a < 0.5, 0 ≤ y ≤ 1, both with small relative error.

    Q = u + v, u = 1 − yᵃ/Γ(1+a), v = −a·yᵃ/Γ(1+a)·T, T = Σ_{n≥1} (−y)ⁿ/((a+n)·n!), and
    P = yᵃ/Γ(1+a)·(1 + a·T) (DiDonato & Morris 1986; the series of γ(a, y), Abramowitz & Stegun §6.5);
    u = −expm1(a ln y − ln Γ(1+a)) with ln Γ(1+a) from its Taylor series, so Q keeps its relative
    accuracy when it is small (Q ≈ −a ln y for small a). ``lny`` = ln y (given separately so that a
    y that underflows keeps its logarithm).
    """
    e = a * lny - _lgamma1p_small(a)
    xg = math.exp(e)
    u = -math.expm1(e)
    term = 1.0
    t_sum = 0.0
    n = 1.0
    while True:
        term *= -y / n
        add = term / (a + n)
        t_sum += add
        if abs(add) <= 1e-17 * abs(t_sum):
            break
        n += 1.0
    return xg * (1.0 + a * t_sum), u - xg * a * t_sum
_TEMME_C = (
    (  # C_0
        -0.3333333333333333, 0.08333333333333333, -0.014814814814814815, 0.0011574074074074073, 0.0003527336860670194,
        -0.0001787551440329218, 3.919263178522438e-05, -2.185448510679992e-06, -1.85406221071516e-06,
        8.296711340953087e-07, -1.7665952736826078e-07, 6.707853543401498e-09, 1.0261809784240309e-08,
        -4.382036018453353e-09, 9.14769958223679e-10, -2.5514193994946248e-11, -5.830772132550426e-11,
        2.4361948020667415e-11, -5.0276692801141755e-12, 1.1004392031956135e-13, 3.371763262400985e-13,
        -1.392388722418162e-13, 2.8534893807047445e-14, -5.139111834242572e-16, -1.9752288294349442e-15,
        8.099521156704561e-16, -1.6522531216398162e-16, 2.5305430097478883e-18, 1.1686939738559576e-17,
        -4.770037049820485e-18, 9.699126059056237e-19, -1.2932565538038175e-20, -6.969230253185693e-20,
    ),
    (  # C_1
        -0.001851851851851852, -0.003472222222222222, 0.0026455026455026454, -0.0009902263374485596,
        0.00020576131687242798, -4.018775720164609e-07, -1.8098550334489977e-05, 7.64916091608111e-06,
        -1.6120900894563446e-06, 4.647127802807434e-09, 1.378633446915721e-07, -5.752545603517705e-08,
        1.1951628599778148e-08, -1.7543241719747647e-11, -1.0091543710600413e-09, 4.162792991842583e-10,
        -8.56390702649298e-11, 6.067215101604758e-14, 7.1624989648114856e-12, -2.933186643771437e-12,
        5.996696365683689e-13, -2.1671786527323313e-16, -4.978339972369262e-14, 2.0291628823713425e-14,
        -4.13125571381061e-15, 8.286516239883097e-19, 3.4100308869333327e-16, -1.3854195302893971e-16,
        2.812346653228875e-17,
    ),
    (  # C_2
        0.004133597883597883, -0.0026813271604938273, 0.0007716049382716049, 2.0093878600823047e-06,
        -0.0001073665322636516, 5.2923448829120125e-05, -1.2760635188618728e-05, 3.423578734096138e-08,
        1.3721957309062934e-06, -6.298992138380055e-07, 1.4280614206064242e-07, -2.0477098421990866e-10,
        -1.409252991086752e-08, 6.228974084922022e-09, -1.3670488396617114e-09, 9.428356159014678e-13,
        1.2872252400089318e-10, -5.5645956134363323e-11, 1.197593554636698e-11, -4.1689782251838634e-15,
        -1.0940640427884595e-12, 4.662239946390136e-13, -9.905105763906907e-14, 1.8931876768373515e-17,
        8.859221872591127e-15, -3.737820398046405e-15,
    ),
    (  # C_3
        0.0006494341563786008, 0.00022947209362139917, -0.0004691894943952557, 0.00026772063206283885,
        -7.561801671883977e-05, -2.396505113867297e-07, 1.1082654115347302e-05, -5.6749528269915965e-06,
        1.4230900732435883e-06, -2.7861080291528143e-11, -1.6958404091930278e-07, 8.099464905388083e-08,
        -1.9111168485973655e-08, 2.3928620439808118e-12, 2.0620131815488797e-09, -9.460496661855133e-10,
        2.1541049775774907e-10, -1.388823336813903e-14, -2.1894761681963938e-11, 9.790998951171684e-12,
        -2.178219188018096e-12, 6.208819573407901e-17, 2.126978363279737e-13, -9.344688791517433e-14,
    ),
    (  # C_4
        -0.0008618882909167117, 0.0007840392217200666, -0.0002990724803031902, -1.4638452578843418e-06,
        6.641498215465122e-05, -3.968365047179435e-05, 1.1375726970678419e-05, 2.507497226237533e-10,
        -1.6954149536558305e-06, 8.907507532205309e-07, -2.292934834000805e-07, 2.956794137544049e-11,
        2.8865829742708783e-08, -1.4189739437803219e-08, 3.4463580499464896e-09, -2.3024517174528067e-13,
        -3.9409233028046403e-10, 1.86023389685045e-10, -4.356323005056618e-11,
    ),
    (  # C_5
        -0.00033679855336635813, -6.972813758365857e-05, 0.0002772753244959392, -0.00019932570516188847,
        6.797780477937208e-05, 1.419062920643967e-07, -1.3594048189768693e-05, 8.018470256334202e-06,
        -2.291481176508095e-06, -3.252473551298454e-10, 3.4652846491085265e-07, -1.8447187191171344e-07,
        4.8240967037894184e-08, -1.7989466721743514e-14, -6.306194500013523e-09, 3.162417628774568e-09,
    ),
    (  # C_6
        0.0005313079364639922, -0.0005921664373536939, 0.0002708782096718045, 7.902353232660328e-07,
        -8.153969367561969e-05, 5.61168275310625e-05, -1.8329116582843375e-05, -3.0796134506033047e-09,
        3.465155368803609e-06, -2.0291327396058603e-06, 5.788792863149004e-07, 2.338630673826657e-13,
        -8.828600746330484e-08,
    ),
    (  # C_7
        0.00034436760689237765, 5.171790908260592e-05, -0.00033493161081142234, 0.0002812695154763237,
        -0.00010976582244684731, -1.2741009095484485e-07, 2.7744451511563645e-05, -1.8263488805711332e-05,
    ),
    (  # C_8
        -0.0006526239185953094, 0.0008394987206720873,
    ),
)
_TEMME_C_REV = tuple(tuple(reversed(c)) for c in _TEMME_C)


def _temme(a: float, y: float, phi: float) -> Tuple[float, float]:
    """(P, Q) by Temme's uniform asymptotic expansion, for a > 100 and |η| ≤ 1 (φ ≤ ½).

    Q(a, y) = ½ erfc(η√(a/2)) + R,  P(a, y) = ½ erfc(−η√(a/2)) − R,
    R = e^(−aη²/2)/√(2πa) · Σ_k C_k(η) a^−k,  η = sign(λ − 1)·√(2φ(λ)),  λ = y/a
    (Temme 1979; Temme 1996, ch. 11; DiDonato & Morris 1986). The
    Taylor coefficients of C_0 … C_8 in :data:`_TEMME_C` were computed for this module in exact
    rational arithmetic from Temme's recursion C_0 = 1/(λ−1) − 1/η,
    C_k = η⁻¹ dC_{k−1}/dη + γ_k/(λ−1), with γ_k the coefficients of 1/Γ*(a) = Σ γ_k a^−k, and λ(η)
    from the Lagrange inversion of η²/2 = λ − 1 − ln λ (the test suite repeats that derivation and
    checks every coefficient). Terms are kept while a^−k > 1e-16 (|C_k| < 0.01 here), and the
    Taylor series (radius 2√π) are cut where |η|ⁿ < 1e-18.
    """
    eta = math.sqrt(2.0 * phi)
    if y < a:
        eta = -eta
    ae = abs(eta)
    if ae < 0.3:
        nmax = 1 if ae == 0.0 else int(41.5 / -math.log(ae)) + 1
    else:
        nmax = 64
    w = 1.0 / a
    wk = 1.0
    total = 0.0
    for coeffs in _TEMME_C_REV:
        c = 0.0
        for cc in coeffs[-nmax:]:
            c = c * eta + cc
        total += c * wk
        wk *= w
        if wk < 1e-16:
            break
    s = math.sqrt(a * phi)
    r = math.exp(-a * phi) / math.sqrt(2.0 * math.pi * a) * total
    if y >= a:
        q = 0.5 * math.erfc(s) + r
        return 1.0 - q, q
    p = 0.5 * math.erfc(s) - r
    return p, 1.0 - p


def _gamma_pq(a: float, y: float, lny: Optional[float] = None) -> Tuple[float, float]:
    """(P(a, y), Q(a, y)) for a > 0, y ≥ 0; the smaller of the two is computed directly (full relative
    accuracy), the larger as its complement. ``lny``: ln y when y itself may have underflowed."""
    if y <= 0.0:
        if a < 0.5 and lny is not None:
            return _small_a(a, 0.0, lny)
        return 0.0, 1.0
    if a <= 100.0:
        if a == 0.5:                          # ν = 1
            sy = math.sqrt(y)
            return math.erf(sy), math.erfc(sy)
        if a == 1.0:                          # ν = 2
            return -math.expm1(-y), math.exp(-y)
        if a <= y <= 700.0 and (a + a).is_integer():
            q = _q_finite_sum(a, y)
            return 1.0 - q, q
        if a < 1.0 and y > 1.0:
            q = _q_continued_fraction(a, y)
            return 1.0 - q, q
        if a < 0.5:
            return _small_a(a, y, math.log(y) if lny is None else lny)
        if y < a + 1.0:
            p = _p_series(a, y)
            return p, 1.0 - p
        q = _q_continued_fraction(a, y)
        return 1.0 - q, q
    phi = _phi(a, y)
    if phi <= 0.5:
        return _temme(a, y, phi)
    if a * phi > 800.0:                       # the smaller tail is below e^-800 (λ outside (0.3, 2.36))
        return (0.0, 1.0) if y < a else (1.0, 0.0)
    if y < a:
        p = _p_series(a, y)
        return p, 1.0 - p
    q = _q_continued_fraction(a, y)
    return 1.0 - q, q


# --------------------------------------------------------------------------------------------
# root finding: Halley's method on ln F, safeguarded by a bracket
# --------------------------------------------------------------------------------------------
Step = Optional[Tuple[float, float, float]]


def _halley(evaluate: Callable[[float], Step], v: float, increasing: bool, vmin: float, vmax: float,
            what: str) -> float:
    """Root of G(v) = ln F(v) − ln target, F monotone (``increasing`` or not) in v.

    ``evaluate(v)`` returns (G, G′, G″), or None where F underflows to 0. Halley's step
    Δ = N / (1 + ½·N·G″/G′), N = −G/G′ (Halley's method; Press et al. 2007, §9.4) converges cubically;
    it is accepted once |Δ| ≤ 1e-6, when the remaining error is of order |Δ|³ ≪ 1e-16. A step that
    leaves the bracket of the root known so far is replaced by bisection (or, with one end open, by a
    doubling jump), so the iteration cannot diverge. A root below ``vmin`` or above ``vmax`` (the
    limits of double precision) raises UndefinedResultError.
    """
    lo, hi = -math.inf, math.inf
    jump = 2.0
    for _ in range(400):
        r = evaluate(v)
        step = None
        if r is None:
            too_low = increasing
        else:
            g, g1, g2 = r
            if g == 0.0:
                return v
            too_low = (g < 0.0) == increasing
            if g1 != 0.0 and math.isfinite(g1):
                newton = -g / g1
                den = 1.0 + 0.5 * newton * g2 / g1
                if 0.5 <= den <= 2.0:
                    step = newton / den
                    if abs(step) <= 1e-6:
                        return v + step
                else:
                    step = newton
                    if abs(step) <= 1e-10:
                        return v + step
        if too_low:
            lo = v
            if v >= vmax:
                raise UndefinedResultError(f"the {what} exceeds the largest double (~1.8e308)")
        else:
            hi = v
            if v <= vmin:
                raise UndefinedResultError(f"the {what} is below the smallest normal double (~2.2e-308)")
        if hi - lo <= 4.0 * _EPS * max(1.0, abs(v)):
            return v
        vn = v + step if step is not None else math.nan
        if not lo < vn < hi:
            if lo > -math.inf and hi < math.inf:
                vn = 0.5 * (lo + hi)
            else:
                vn = v + jump if too_low else v - jump
                jump *= 2.0
        v = min(max(vn, vmin), vmax)
    raise ConvergenceError(f"the {what} did not converge")


def _finite_exp(v: float, what: str) -> float:
    """e^v for a quantile found in logarithms; UndefinedResultError outside the normal doubles."""
    if v > _LOG_MAX:
        raise UndefinedResultError(f"the {what} exceeds the largest double (~1.8e308)")
    r = math.exp(v)
    if not _TINY <= r <= 1.7976931348623157e308:
        raise UndefinedResultError(f"the {what} is beyond the range of normal doubles (2.2e-308 to 1.8e308)")
    return r


# --------------------------------------------------------------------------------------------
# χ²
# --------------------------------------------------------------------------------------------
def chi2_sf(x: float, dof: float) -> float:
    """Survival function of the χ² distribution: P(X > x) for X ~ χ²(dof).

    Equals the regularized upper incomplete gamma function Q(dof/2, x/2), i.e.
    ``scipy.special.chdtrc(dof, x)``.

    Parameters
    ----------
    x : float
        χ² value, finite and ≥ 0 (x = 0 gives 1.0).
    dof : float
        Degrees of freedom, finite, 1e-300 ≤ dof (need not be a whole number).

    Returns
    -------
    float
        The tail probability in [0, 1]; relative error about (2 + |ln sf|)·1e-16, at most ~3e-13,
        where the result is ≥ 1e-300 (0.0 where it is below the smallest double).

    Raises
    ------
    InputError
        ``x`` or ``dof`` not a finite number, x < 0 or dof < 1e-300.

    Notes
    -----
    With a = dof/2, y = x/2: the finite sums of Abramowitz & Stegun (1964) 26.4.4/26.4.5 for whole
    and half-integer a ≤ 100 and y ≥ a; the series of P or the continued fraction of Q (Press et al.
    2007, §6.2, modified Lentz) with a cancellation-free prefactor (Temme 1979; DiDonato & Morris
    1986); the small-a formula of DiDonato & Morris (1986, §3); Temme's (1979) uniform asymptotic
    expansion for a > 100 near the centre of the distribution.

    Examples
    --------
    >>> round(chi2_sf(3.841458820694124, 1), 12)
    0.05
    """
    xv = _number("x", x)
    if xv < 0.0:
        raise InputError("x", f"must be >= 0, got {xv!r}")
    a = _half_dof(dof)
    if xv == 0.0:
        return 1.0
    y = 0.5 * xv
    q = _gamma_pq(a, y, math.log(xv) - _LN2 if y < _TINY else None)[1]
    return min(1.0, max(0.0, q))


def _gamma_start(a: float, target: float, upper: bool) -> float:
    """ln y0, a start for Q(a, y) = target (``upper``) or P(a, y) = target, target ≤ ½."""
    nu = a + a
    z = -normal_ppf(target) if upper else normal_ppf(target)
    c = 2.0 / (9.0 * nu)
    base = 1.0 - c + z * math.sqrt(c)              # Wilson & Hilferty 1931
    ln_target = math.log(target)
    if a > 1e6:                                    # z√c < 0.02: the Wilson–Hilferty cube is close to 1
        return math.log(a) + 3.0 * math.log(base)
    if upper:
        ln_wh = math.log(a * base ** 3) if base > 0.0 else -math.inf
        if target > 1e-3 and a >= 1.0 and base > 0.0:
            return ln_wh
        if a < 1.0 and target > 1e-3:
            # Q(a, y) ≈ 1 − yᵃ/Γ(1 + a) for small a and moderate Q (Abramowitz & Stegun 6.5.29)
            ln_y = (math.log1p(-target) + math.lgamma(a + 1.0)) / a
            if ln_y < 0.0:
                return ln_y
        # far upper tail: Q ≈ y^(a−1) e^−y / (Γ(a)·(1 − (a − 1)/y)) (Abramowitz & Stegun 6.5.32, two terms)
        lg = math.lgamma(a)
        y = max(2.0 * a, 1.0, -ln_target - lg)
        for _ in range(4):
            y = -ln_target - lg + (a - 1.0) * math.log(y) - math.log(max(0.5, 1.0 - (a - 1.0) / y))
            y = max(y, 1.0, 1.5 * a)
        return math.log(y) if y > 3.0 * a or base <= 0.0 else ln_wh
    # lower tail: P ≈ y^a e^−y / Γ(a + 1)·(1 + y/(a + 1)) for small y (Abramowitz & Stegun 6.5.29, two
    # terms); P(a, y) ≤ y^a/Γ(a + 1), so the root lies above the first estimate
    ln_y = (ln_target + math.lgamma(a + 1.0)) / a
    if ln_y < -1.0:
        return ln_y
    if base > 0.0:
        ln_wh = math.log(a * base ** 3)
        if ln_wh > ln_y:
            return ln_wh
    y = math.exp(min(ln_y, 0.0))
    for _ in range(3):
        y = math.exp((ln_target + math.lgamma(a + 1.0) + y - math.log1p(y / (a + 1.0))) / a)
    return math.log(y)


def chi2_isf(p: float, dof: float) -> float:
    """Inverse survival function of χ²: the x with ``chi2_sf(x, dof) == p``.

    Equals ``scipy.special.chdtri(dof, p)``; ``chi2_isf(0.05, dof)`` is the upper 95 % point.

    Parameters
    ----------
    p : float
        Upper tail probability, 0 < p < 1.
    dof : float
        Degrees of freedom, finite, dof ≥ 1e-300.

    Returns
    -------
    float
        x > 0, relative error ≲ 1e-14 (the root of the accurate :func:`chi2_sf`).

    Raises
    ------
    InputError
        ``p`` or ``dof`` out of range or not finite.
    UndefinedResultError
        The quantile is below the smallest normal double (only for dof ≪ 1 and p close to 1).

    Notes
    -----
    For p ≤ ½ solves Q(a, y) = p, otherwise P(a, y) = 1 − p (exact in floating point), so the
    small tail is always the one inverted. Start: Wilson & Hilferty (1931), or the leading term of
    the lower tail P ≈ yᵃ/Γ(a+1) / of the upper tail of small a; then Halley steps on ln Q (or ln P)
    against ln y with the analytic density (see :func:`_halley`): two or three evaluations of the
    tail for typical arguments, one for dof ≳ 1e6.

    Examples
    --------
    >>> round(chi2_isf(0.05, 8), 10)
    15.5073130559
    """
    pv = _probability(p)
    a = _half_dof(dof)
    upper = pv <= 0.5
    target = pv if upper else 1.0 - pv
    ln_target = math.log(target)

    def evaluate(v: float) -> Step:
        y = math.exp(v)
        lower_p, upper_q = _gamma_pq(a, y, v)
        f = upper_q if upper else lower_p
        if f <= 0.0:
            return None
        g1 = a * _prefactor(a, y) / f          # y·density / F
        if upper:
            g1 = -g1
        return math.log(f) - ln_target, g1, g1 + g1 * (a - 1.0 - y) - g1 * g1

    v0 = min(max(_gamma_start(a, target, upper), math.log(_TINY)), _LOG_MAX - _LN2)
    v = _halley(evaluate, v0, not upper, math.log(_TINY), _LOG_MAX - _LN2, "χ² quantile")
    return _finite_exp(v + _LN2, "χ² quantile")


# --------------------------------------------------------------------------------------------
# normal
# --------------------------------------------------------------------------------------------
def normal_ppf(p: float) -> float:
    """Quantile of the standard normal distribution: z with Φ(z) = p (``scipy.special.ndtri(p)``).

    Parameters
    ----------
    p : float
        Probability, 0 < p < 1.

    Returns
    -------
    float
        z, relative error ≲ 5e-16 for p ≥ 1e-300 (|z| ≤ 38.5 for every double p; for subnormal p
        the precision of p itself limits it).

    Raises
    ------
    InputError
        ``p`` not a finite number strictly between 0 and 1.

    Notes
    -----
    Start from the rational approximation of Abramowitz & Stegun 26.2.23 (|error| < 4.5e-4), then
    Halley steps (Press et al. 2007, §9.4) on ½ erfc(z/√2) = q in the tail (q = min(p, 1 − p) ≤ ¼,
    on the logarithm) or on ½ erf(z/√2) = ½ − q in the centre (both sides exact in floating
    point), with ``math.erfc``/``math.erf``: two or three evaluations.

    Examples
    --------
    >>> round(normal_ppf(0.975), 12)
    1.95996398454
    """
    pv = _probability(p)
    if pv == 0.5:
        return 0.0
    q = pv if pv < 0.5 else 1.0 - pv
    w = _normal_upper(q)
    return -w if pv < 0.5 else w


_AS_C = (2.515517, 0.802853, 0.010328)
_AS_D = (1.432788, 0.189269, 0.001308)


def _normal_upper(q: float) -> float:
    """w ≥ 0 with ½ erfc(w/√2) = q, 0 < q < ½."""
    t = math.sqrt(-2.0 * math.log(q))
    w = t - (_AS_C[0] + t * (_AS_C[1] + t * _AS_C[2])) / (1.0 + t * (_AS_D[0] + t * (_AS_D[1] + t * _AS_D[2])))
    if q > 0.25:                                # centre: ½ erf(w/√2) = d, Halley on w
        d = 0.5 - q
        if d < 1e-4:
            w = _SQRT_2PI * d
        for _ in range(50):
            dens = math.exp(-0.5 * w * w) / _SQRT_2PI
            newton = -(0.5 * math.erf(w / _SQRT2) - d) / dens
            step = newton / (1.0 - 0.5 * newton * w)
            w += step
            if abs(step) <= 1e-6 * w:
                return w
        raise ConvergenceError("the normal quantile did not converge")
    ln_q = math.log(q)
    w = max(w, 0.5)
    for _ in range(50):
        f = 0.5 * math.erfc(w / _SQRT2)
        if f <= 0.0:                            # only for q near the smallest subnormal
            w *= 0.999
            continue
        g1 = -math.exp(-0.5 * w * w) / _SQRT_2PI / f
        newton = -(math.log(f) - ln_q) / g1
        step = newton / (1.0 + 0.5 * newton * (-w * g1 - g1 * g1) / g1)
        w += step
        if abs(step) <= 1e-6 * w:
            return w
    raise ConvergenceError("the normal quantile did not converge")
_BETA_H = (
    1.0, -0.020833333333333332, 0.000390625, -7.879670965608466e-06, 1.6967665791721782e-07, -3.805064191721906e-09,
    8.748377596315407e-11, -2.044523359411974e-12, 4.833351797967704e-14, -1.152434101767386e-15,
    2.76605204359937e-17, -6.67428195089166e-19, 1.61745507718158e-20, -3.93397792009138e-22, 9.597634062586047e-24,
    -2.347690291162632e-25, 5.7558703875442666e-27, -1.414008810826549e-28, 3.479869365059028e-30,
    -8.577466165340376e-32, 2.1172351041679865e-33, -5.232780285737599e-35,
)


# --------------------------------------------------------------------------------------------
# Student t
# --------------------------------------------------------------------------------------------
def _gamma_ratio_half(a: float) -> float:
    """Γ(a + ½)/Γ(a) for a > 0; for a ≥ 10 as √a·exp(a·(ln(1+h) − h))·Γ*(a+½)/Γ*(a), h = 1/(2a), which
    loses nothing to the size of ln Γ (Abramowitz & Stegun 6.1.40 for Γ*)."""
    if a >= 10.0:
        return math.sqrt(a) * math.exp(a * _log1pmx(0.5 / a) + _lgamma_star(a + 0.5) - _lgamma_star(a))
    return math.exp(math.lgamma(a + 0.5) - math.lgamma(a))


def _betacf(a: float, b: float, x: float) -> float:
    """Continued fraction of the incomplete beta ratio, I_x(a, b) = xᵃ(1−x)ᵇ/(a·B(a, b))·cf, by the
    modified Lentz method (Press et al. 2007, §6.4 and §5.2); converges quickly for
    x < (a + 1)/(a + b + 2)."""
    qab = a + b
    qap = a + 1.0
    qam = a - 1.0
    c = 1.0
    d = 1.0 - qab * x / qap
    if abs(d) < _FPMIN:
        d = _FPMIN
    d = 1.0 / d
    h = d
    m = 1.0
    for _ in range(_MAXIT):
        m2 = m + m
        aa = m * ((b - m) * x) / ((qam + m2) * (a + m2))
        c, d = _lentz_step(aa, 1.0, c, d)
        h *= d * c
        aa = -(a + m) * ((qab + m) * x) / ((a + m2) * (qap + m2))
        c, d = _lentz_step(aa, 1.0, c, d)
        delta = d * c
        h *= delta
        if abs(delta - 1.0) <= _EPS:
            return h
        m += 1.0
    raise ConvergenceError(f"incomplete beta continued fraction did not converge (a={a!r}, b={b!r}, x={x!r})")


def _t_tail_expansion(a: float, om: float, ratio: float) -> float:
    """P(T > t) = ½ I_x(a, ½) for ν = 2a ≥ 50 and ω = ln(1 + t²/ν) ≤ 2, ``ratio`` = Γ(a+½)/Γ(a).

    With s = e^−w: I_x(a, ½) = (1/B(a, ½)) ∫_ω^∞ e^(−κw) w^(−½) h(w) dw, κ = a − ¼,
    h(w) = ((w/2)/sinh(w/2))^½ = Σ_j h_j w^(2j) (even, radius 2π; coefficients :data:`_BETA_H`
    computed for this module in exact arithmetic and re-derived in the tests). Termwise:
    I_x = (1/B)·κ^−½·Σ_j h_j κ^(−2j) Γ(2j + ½, κω), the incomplete gamma functions of half-integer
    order from Γ(½, z) = √π erfc √z and the upward recurrence Γ(s+1, z) = sΓ(s, z) + zˢe⁻ᶻ
    (Abramowitz & Stegun §6.5), which adds positive terms only. The substitution s = e^−w and the
    choice κ = a + (b − 1)/2 follow Temme's treatment of the incomplete beta function for one large
    parameter (Temme 1996, ch. 11); the terms fall at least as fast as
    (ω/2π)^2j and as (2j)!/(2πκ)^2j, so 3 to 20 terms reach 1e-17.
    """
    kappa = a - 0.25
    z = kappa * om
    sz = math.sqrt(z)
    g = _SQRT_PI * math.erfc(sz)
    pw = sz * math.exp(-z)
    if g == 0.0 and pw == 0.0:
        return 0.0
    total = g
    scale = 1.0
    kinv2 = 1.0 / (kappa * kappa)
    s = 0.5
    for hj in _BETA_H[1:]:
        g = s * g + pw
        pw *= z
        s += 1.0
        g = s * g + pw
        pw *= z
        s += 1.0
        scale *= kinv2
        term = hj * g * scale
        total += term
        if abs(term) <= 1e-17 * total:
            break
    return 0.5 * ratio / _SQRT_PI / math.sqrt(kappa) * total


def _t_probabilities(t: float, nu: float, a: float, ratio: float) -> Tuple[float, float, float]:
    """(S, C, ln f) for t > 0: S = P(T > t), C = P(0 < T < t) = ½ − S, f the density at t,
    f = Γ(a+½)/(Γ(a)√(πν))·(1 + t²/ν)^−(a+½) (Abramowitz & Stegun §26.7), a = ν/2.

    S = ½ I_x(ν/2, ½), x = ν/(ν + t²) (Abramowitz & Stegun §26.7 with §26.5). Near the centre,
    x ≥ (a + 1)/(a + 2.5), C = ½ I_{1−x}(½, ν/2) is computed directly by the continued fraction of
    Numerical Recipes §6.4; elsewhere S, by that continued fraction or, for ν ≥ 50 and
    ln(1 + t²/ν) ≤ 2, by :func:`_t_tail_expansion`. The smaller of S and C keeps its relative
    accuracy.
    """
    r = (nu / t) / t                          # ν/t², no overflow
    if r < 1.0:
        x = r / (1.0 + r)
        y = 1.0 / (1.0 + r)
        om = math.log1p(r) - math.log(r) if r >= _TINY else 2.0 * math.log(t) - math.log(nu)
    else:
        w = t * (t / nu)
        x = 1.0 / (1.0 + w)
        y = w / (1.0 + w)
        om = math.log1p(w)
    xa = math.exp(-a * om)                    # xᵃ
    ln_dens = math.log(ratio) - 0.5 * (_LN_PI + math.log(nu)) - (a + 0.5) * om
    if y <= 1.5 / (a + 2.5):                  # x ≥ (a + 1)/(a + 2.5), without rounding x
        j = xa * math.sqrt(y) * ratio / _SQRT_PI * _betacf(0.5, a, y) / 0.5
        return 0.5 - 0.5 * j, 0.5 * j, ln_dens
    if a >= 25.0 and om <= 2.0:
        s = _t_tail_expansion(a, om, ratio)
    else:
        s = 0.5 * xa * math.sqrt(y) * ratio / _SQRT_PI * _betacf(a, 0.5, x) / a
    return s, 0.5 - s, ln_dens


def t_ppf(p: float, dof: float) -> float:
    """Quantile of Student's t distribution: t with P(T ≤ t) = p for T ~ t(dof).

    Equals ``scipy.special.stdtrit(dof, p)``; ``t_ppf(0.975, dof)`` is the two-sided 95 % multiplier.

    Parameters
    ----------
    p : float
        Probability, 0 < p < 1 (p < ½ gives a negative t; t_ppf(1 − p) = −t_ppf(p)).
    dof : float
        Degrees of freedom, finite, dof ≥ 1e-300 (need not be whole; large dof tends to the normal).

    Returns
    -------
    float
        t, relative error ≲ 1e-14.

    Raises
    ------
    InputError
        ``p`` or ``dof`` out of range or not finite.
    UndefinedResultError
        |t| beyond the range of double precision (only for dof ≪ 1 with p far from ½).

    Notes
    -----
    dof = 1 and dof = 2 have closed forms (t = cot(πq); t = (1 − 2q)/√(2q(1 − q)), q = min(p, 1−p);
    Abramowitz & Stegun 26.7.3/26.7.4). Otherwise: start from the Cornish–Fisher expansion
    (Abramowitz & Stegun 26.7.5, terms to ν⁻⁴) or, in the far tail of small dof, from the leading
    term of the tail P(T > t) ≈ Γ(a+½)/(√π Γ(a))·ν^(ν/2−1)·t^−ν; then Halley steps on
    ln P(T > t) (or, for |p − ½| < ¼, on ln P(0 < T < t)) against ln t with the analytic density;
    the probabilities as in :func:`_t_probabilities`. One evaluation for dof ≳ 1e4, two or three
    otherwise.

    Examples
    --------
    >>> round(t_ppf(0.975, 8), 10)
    2.3060041352
    """
    pv = _probability(p)
    nu = 2.0 * _half_dof(dof)
    if pv == 0.5:
        return 0.0
    q = pv if pv < 0.5 else 1.0 - pv
    sign = -1.0 if pv < 0.5 else 1.0
    if nu == 1.0:
        t = math.tan(math.pi * (0.5 - q)) if q > 0.25 else 1.0 / math.tan(math.pi * q)
    elif nu == 2.0:
        t = (1.0 - 2.0 * q) / math.sqrt(2.0 * q * (1.0 - q))
    else:
        t = _t_upper(q, nu)
    if not t <= 1.7976931348623157e308:
        raise UndefinedResultError("the t quantile exceeds the largest double (~1.8e308)")
    return sign * t


def _t_upper(q: float, nu: float) -> float:
    """t > 0 with P(T > t) = q, 0 < q < ½."""
    a = 0.5 * nu
    ratio = _gamma_ratio_half(a)
    centre = q > 0.25
    target = 0.5 - q if centre else q
    ln_target = math.log(target)

    def evaluate(v: float) -> Step:
        t = math.exp(v)
        s, c, ln_dens = _t_probabilities(t, nu, a, ratio)
        f = c if centre else s
        if f <= 0.0:
            return None
        ln_f = math.log(f)
        g1 = math.exp(v + ln_dens - ln_f)       # t·f(t)/F
        if not centre:
            g1 = -g1
        ty = t * (t / nu)
        return ln_f - ln_target, g1, g1 - g1 * (nu + 1.0) * ty / (1.0 + ty) - g1 * g1

    v0 = min(max(math.log(_t_start(q, nu, a, ratio)), math.log(_TINY)), _LOG_MAX)
    return _finite_exp(_halley(evaluate, v0, centre, math.log(_TINY), _LOG_MAX, "t quantile"), "t quantile")


def _t_start(q: float, nu: float, a: float, ratio: float) -> float:
    """Start value for the upper t quantile (see :func:`t_ppf`)."""
    z = -normal_ppf(q)
    z2 = z * z
    g1 = (z2 + 1.0) * z / 4.0
    g2 = ((5.0 * z2 + 16.0) * z2 + 3.0) * z / 96.0
    g3 = (((3.0 * z2 + 19.0) * z2 + 17.0) * z2 - 15.0) * z / 384.0
    g4 = ((((79.0 * z2 + 776.0) * z2 + 1482.0) * z2 - 1920.0) * z2 - 945.0) * z / 92160.0
    t_cf = z + (g1 + (g2 + (g3 + g4 / nu) / nu) / nu) / nu
    # far tail: P(T > t) ≈ Γ(a+½)/(√π Γ(a)) ν^(ν/2 − 1) t^−ν
    ln_t = (math.log(ratio) - 0.5 * _LN_PI - math.log(q)) / nu + (0.5 - 1.0 / nu) * math.log(nu)
    if ln_t > _LOG_MAX:
        return math.exp(_LOG_MAX)
    t_tail = math.exp(ln_t)
    if t_cf <= 0.0 or t_tail * t_tail > 4.0 * nu + 10.0 or abs(g4 / nu / nu / nu / nu) > 0.1 * z:
        return t_tail
    return t_cf
