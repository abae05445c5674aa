"""tests/reference/mpref.py -- high-precision references (mpmath, Debian
python3-mpmath) for the quantile tests, used where SciPy's own routines are
not accurate enough to judge (very large parameters, far tails).

Each function returns the error of a value feasgate produced, measured by
evaluating the distribution function at that value with mpmath at 40
digits: the incomplete beta and gamma by tanh-sinh quadrature of the
density (mpmath.quad) around the point, with breakpoints spaced by the
density's own scale there, or mpmath.betainc / mpmath.gammainc where those
converge. The error reported is |F(x) - target| / (f(x) |x|), the relative
error in x that the distance in probability implies.
"""
import mpmath as mp

mp.mp.dps = 40


def _scale(a, b, x):
    sd = mp.sqrt(a * b / ((a + b) ** 2 * (a + b + 1)))
    kap = abs((a - 1) / x - (b - 1) / (1 - x))
    return min(sd, 1 / kap) if kap > 0 else sd


def mp_ibeta(x, a, b, y=None):
    """(I_x(a, b), 1 - I_x(a, b)) by quadrature of the density; y = 1 - x
    when x is near 1 (used through the symmetry I_x(a,b) = 1 - I_y(b,a))."""
    if y is not None and x > 0.5:
        lo, up = mp_ibeta(y, b, a)
        return up, lo
    x = mp.mpf(x); a = mp.mpf(a); b = mp.mpf(b)
    lb = mp.loggamma(a) + mp.loggamma(b) - mp.loggamma(a + b)
    f = lambda t: mp.exp((a - 1) * mp.log(t) + (b - 1) * mp.log1p(-t) - lb)
    sc = _scale(a, b, x)
    mode = (a - 1) / (a + b - 2) if a > 1 and b > 1 else None
    lower_side = (x < a / (a + b)) if mode is None else (x <= mode)
    ks = (400, 200, 80, 40, 20, 10, 5, 2, 1)
    if lower_side:
        pts = sorted(set([max(mp.mpf(0), x - k * sc) for k in ks] + [x]))
        lo = mp.quad(f, pts)
        return lo, 1 - lo
    pts = sorted(set([min(mp.mpf(1), x + k * sc) for k in ks] + [x]))
    up = mp.quad(f, pts)
    return 1 - up, up


def mp_beta_xerr(u, uc, a, b, x, y):
    """Relative error of min(x, y) as the beta(a, b) quantile of u (upper
    tail uc): the smaller tail is compared."""
    if x <= 0.5:
        lo, up = mp_ibeta(x, a, b); z, A, B = x, a, b
    else:
        lo, up = mp_ibeta(x, a, b, y); z, A, B = y, b, a
    A = mp.mpf(A); B = mp.mpf(B); Z = mp.mpf(z)
    lb = mp.loggamma(A) + mp.loggamma(B) - mp.loggamma(A + B)
    dens = mp.exp((A - 1) * mp.log(Z) + (B - 1) * mp.log1p(-Z) - lb)
    d = (lo - u) if u <= uc else (uc - up)
    return float(abs(d) / (dens * Z))


def mp_igamma(a, x):
    """(P(a, x), Q(a, x)): mpmath.gammainc below a = 1e4, else quadrature
    of the density."""
    a = mp.mpf(a); x = mp.mpf(x)
    if a < 1e4:
        return (mp.gammainc(a, 0, x, regularized=True),
                mp.gammainc(a, x, mp.inf, regularized=True))
    lg = mp.loggamma(a)
    f = lambda t: mp.exp((a - 1) * mp.log(t) - t - lg)
    kap = abs((a - 1) / x - 1)
    sc = min(mp.sqrt(a), 1 / kap) if kap > 0 else mp.sqrt(a)
    ks = (400, 200, 80, 40, 20, 10, 5, 2, 1)
    if x <= a - 1:
        pts = sorted(set([max(mp.mpf(0), x - k * sc) for k in ks] + [x]))
        p = mp.quad(f, pts)
        return p, 1 - p
    pts = sorted(set([x + k * sc for k in ks] + [x]))
    q = mp.quad(f, pts)
    return 1 - q, q


def mp_gamma_xerr(u, uc, a, x):
    """Relative error of x as the standard gamma(a) quantile of u."""
    p, q = mp_igamma(a, x)
    A = mp.mpf(a); X = mp.mpf(x)
    dens = mp.exp((A - 1) * mp.log(X) - X - mp.loggamma(A))
    d = (p - u) if u <= uc else (uc - q)
    return float(abs(d) / (dens * X))


def mp_t_xerr(u, uc, df, t):
    """Relative error of t as the Student t(df) quantile of u: the tail
    beyond |t| is I_x(df/2, 1/2) / 2 with x = df / (df + t^2) (Abramowitz
    & Stegun 26.7.1), from mpmath.betainc (its series in x, no
    cancellation)."""
    T = mp.mpf(t); D = mp.mpf(df)
    if T == 0:
        return abs(float(mp.mpf(u) - mp.mpf(uc)))
    x = D / (D + T * T)
    tail = mp.betainc(D / 2, mp.mpf(0.5), 0, x, regularized=True) / 2
    dens = (mp.exp(mp.loggamma((D + 1) / 2) - mp.loggamma(D / 2))
            / mp.sqrt(D * mp.pi) * (1 + T * T / D) ** (-(D + 1) / 2))
    return float(abs(tail - min(u, uc)) / (dens * abs(T)))


def mp_beta_int_xerr(u, uc, a, b, x, terms_max=2000):
    """mp_beta_xerr for integer a, b (Clopper-Pearson) by the binomial
    identity I_x(a, b) = P(Bin(a + b - 1, x) >= a) (Abramowitz & Stegun
    26.5.24): the smaller of the two sums (at most terms_max terms) at 40
    digits, exact apart from rounding. None when both sums are longer."""
    a, b = int(a), int(b)
    if min(a, b) > terms_max:
        return None
    N = a + b - 1
    X = mp.mpf(x)
    Y = 1 - X
    if a <= b:   # upper = P(Bin <= a - 1)
        up = mp.fsum(mp.binomial(N, j) * X ** j * Y ** (N - j) for j in range(a))
        lo = 1 - up
    else:        # lower = P(Bin >= a) = P(Bin(N, 1-x) <= b - 1)
        lo = mp.fsum(mp.binomial(N, j) * Y ** j * X ** (N - j) for j in range(b))
        up = 1 - lo
    A, B = mp.mpf(a), mp.mpf(b)
    lb = mp.loggamma(A) + mp.loggamma(B) - mp.loggamma(A + B)
    dens = mp.exp((A - 1) * mp.log(X) + (B - 1) * mp.log(Y) - lb)
    d = (lo - u) if u <= uc else (uc - up)
    return float(abs(d) / (dens * min(X, Y)))
