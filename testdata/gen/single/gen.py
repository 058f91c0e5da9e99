#!/usr/bin/python3
"""Reference magnifications of a finite source lensed by a point lens.

Run with Debian's python3 and python3-mpmath (1.2.1):  /usr/bin/python3 gen.py
Prints Go table rows {u, rho, ld, A} used by lens/single_test.go.

Uniform disk: the closed form of Witt & Mao (1994, ApJ 430, 505) with mpmath's
complete elliptic integrals ellipk/ellipe/ellippi at 40 digits, cross-checked
against the 1-D angular integral of the radial antiderivative
G(r) = (r/2) sqrt(r^2+4) (the reduction used by Lee et al. 2009, ApJ 695, 200)
with mpmath.quad; the script stops if they differ by more than 1e-18 relative
and prints the largest difference.
Limb-darkened disk (linear law I(mu)/I(1) = 1 - ld (1 - mu)): the exact
decomposition into uniform disks,
  A_LD = (1-G) A_U(u,rho) + (3G/2) int_0^{pi/2} sin^3 t A_U(u, rho sin t) dt,
G = 2 ld/(3 - ld), integrated with mpmath.quad split where rho sin t = u.
Values are printed to 17 significant digits.
"""
import mpmath as mp

mp.mp.dps = 40


def wm94(u, rho):
    u, rho = mp.mpf(u), mp.mpf(rho)
    if abs(u - rho) > mp.mpf(10) ** (-mp.mp.dps) * rho:
        # n -> 1 as u -> rho: triple the working digits so that 1 - n keeps its
        # digits when the limb-darkening quadrature samples next to u = rho.
        with mp.workdps(3 * mp.mp.dps):
            return +wm94_direct(u, rho)
    # |u - rho| below the working precision: the u = rho limit, whose error
    # is O(|u - rho| log|u - rho|).
    return 2 / mp.pi * (1 / rho + (1 + rho**2) * mp.atan(rho) / rho**2)


def wm94_direct(u, rho):
    if u == 0:
        return mp.sqrt(1 + 4 / rho**2)
    if u == rho:
        return 2 / mp.pi * (1 / rho + (1 + rho**2) * mp.atan(rho) / rho**2)
    n = 4 * u * rho / (u + rho) ** 2
    m = 4 * n / (4 + (u - rho) ** 2)
    w = mp.sqrt(4 + (u - rho) ** 2)
    t = ((u + rho) * w * mp.ellipe(m)
         - (u - rho) * (8 + u**2 - rho**2) / w * mp.ellipk(m)
         + 4 * (u - rho) ** 2 * (1 + rho**2) / ((u + rho) * w) * mp.ellippi(n, m))
    return t / (2 * mp.pi * rho**2)


def angular(u, rho):
    u, rho = mp.mpf(u), mp.mpf(rho)
    G = lambda r: r / 2 * mp.sqrt(r**2 + 4)
    if u < rho:
        f = lambda p: G(u * mp.cos(p) + mp.sqrt(rho**2 - (u * mp.sin(p)) ** 2))
        # split where sqrt(rho^2 - u^2 sin^2 p) is smallest (near-singular as u -> rho)
        return 2 * mp.quad(f, [0, mp.pi / 2, mp.pi]) / (mp.pi * rho**2)
    pm = mp.asin(rho / u)

    def f(p):
        c = mp.sqrt(rho**2 - (u * mp.sin(p)) ** 2)
        return G(u * mp.cos(p) + c) - G(u * mp.cos(p) - c)
    return 2 * mp.quad(f, [0, pm]) / (mp.pi * rho**2)


def limb(u, rho, ld):
    u, rho, ld = mp.mpf(u), mp.mpf(rho), mp.mpf(ld)
    g = 2 * ld / (3 - ld)
    f = lambda t: mp.sin(t) ** 3 * wm94(u, rho * mp.sin(t))
    pts = [0, mp.pi / 2]
    if u < rho:
        pts = [0, mp.asin(u / rho), mp.pi / 2]
    return (1 - g) * wm94(u, rho) + 3 * g / 2 * mp.quad(f, pts)


uniform = [
    # large u/rho, where the closed form cancels
    (30, 1e-3), (100, 1e-3), (249, 1e-3), (251, 1e-3), (1000, 1e-3), (1e4, 1e-3),
    (30, 0.1), (251, 0.1), (1000, 0.1), (30, 1), (251, 1), (1000, 1),
    # u close to rho (relative offsets 1e-6, 1e-10)
    (1 - 1e-6, 0.01), (1 + 1e-6, 0.01), (1 - 1e-10, 0.01), (1 + 1e-10, 0.01),
    (1 - 1e-10, 1), (1 + 1e-10, 1),
    # very small and very large sources
    (0.3, 1e-5), (3, 1e-5), (0.5, 10), (1.5, 10), (0.5, 100), (3, 100),
]
limbs = [
    (0.0, 0.05, 0.3), (0.7, 0.05, 0.3), (1.0, 0.05, 1.0), (1.3, 0.05, 1.0),
    (1 - 1e-6, 0.01, 0.6), (1 + 1e-6, 0.01, 0.6), (5, 0.01, 0.6), (30, 0.01, 0.6),
    (0.2, 2, 0.6), (0.99, 2, 0.6), (3, 2, 0.6), (0.5, 10, 0.8),
]

print("// uniform: {u, rho, 0, A}")
worst = mp.mpf(0)
for z, rho in uniform:
    u = mp.mpf(z) * mp.mpf(rho)
    # the table stores u as the float64 nearest z*rho; evaluate there
    uf = mp.mpf(float(u))
    a = wm94(uf, rho)
    b = angular(uf, rho)
    worst = max(worst, abs(a - b) / a)
    if abs(a - b) > mp.mpf(1e-18) * a:
        raise SystemExit("closed form and angular integral differ at %s %s: %s" % (uf, rho, a - b))
    print("{%s, %s, 0, %s}," % (mp.nstr(uf, 17), repr(float(rho)), mp.nstr(a, 17)))
print("// largest relative difference, closed form vs angular integral: %s" % mp.nstr(worst, 2))
print("// limb darkened: {u, rho, ld, A}")
mp.mp.dps = 30
for z, rho, ld in limbs:
    uf = mp.mpf(float(mp.mpf(z) * mp.mpf(rho)))
    print("{%s, %s, %s, %s}," % (mp.nstr(uf, 17), repr(float(rho)), repr(float(ld)), mp.nstr(limb(uf, rho, ld), 17)))
