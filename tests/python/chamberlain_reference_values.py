"""Why this exists: the hot-exosphere validation in tests/engine.rs
(`escaping_atoms_fill_the_chamberlain_exosphere`) checks the engine's
density at 1000 and 2500 km against the collisionless exosphere of
Chamberlain (1963, Planet. Space Sci. 11, 901), ballistic plus escaping
atoms, exobase at the surface. The engine's domain ends at an outer
boundary: a bound atom whose apocentre lies beyond it leaves and never
comes back, so the incoming legs of those orbits are missing from the
model's density. This script computes that correction, and checks the
closed form, by integrating the Maxwellian over velocity space with each
velocity classified by its orbit (Liouville's theorem: f is constant along
a collisionless path, so f(r, v) = n_c exp(-(lambda_c - lambda)) times a
Maxwellian in v wherever the path connects to the exobase; Chamberlain &
Hunten 1987, Theory of Planetary Atmospheres, ch. 7).

Constants: CODATA 2018/2022 via scipy.constants; Moon GM and radius from
JPL's planetary and satellite physical parameters (DE440); Na mass 22.98976928 u
(IUPAC).

Run: python3 tests/python/chamberlain_reference_values.py
"""

import warnings

import numpy as np
from scipy import constants as C
from scipy.integrate import IntegrationWarning, quad
from scipy.special import gammainc

MU = 4902.800e9  # m^3 s^-2
R = 1737.4e3  # m
M_NA = 22.98976928 * C.atomic_mass


def lam(T, r):
    return MU * M_NA / (C.k * T * r)


def closed_form(lc, l):
    """n(r)/n_c, ballistic + escaping (Chamberlain 1963)."""
    P = lambda x: gammainc(1.5, x)
    psi = l * l / (l + lc)
    F = np.sqrt(lc * lc - l * l) / lc * np.exp(-psi)
    bal = P(l) - F * P(l - psi)
    esc = 0.5 * (1.0 - P(l) - F * (1.0 - P(l - psi)))
    return np.exp(-(lc - l)) * (bal + esc), np.exp(-(lc - l)) * bal


def c_lengths(x, s_r, lc, l, lb, r_b_over_r):
    """Measure in cos(theta) (theta from the local vertical, over [-1, 1])
    of the velocities of speed x = v/a at r = s_r R that lie on paths from
    the exobase still in the domain: (outgoing, incoming).

    A path reaches the exobase R iff its radial kinetic energy there is
    >= 0: x^2 + (lambda_c - lambda) >= s_r^2 x^2 sin^2(theta) (energy and
    angular momentum conservation), i.e. c^2 >= 1 - A. It reaches the
    boundary r_b iff x^2 - lambda + lambda_b >= (r / r_b)^2 x^2 sin^2(theta),
    i.e. c^2 >= 1 - B.
    """
    if x == 0.0:
        return 0.0, 0.0
    a = min(1.0, (x * x + lc - l) / (s_r * s_r * x * x))
    out = 1.0 - np.sqrt(1.0 - a)
    if x * x >= l:
        return out, 0.0  # unbound: incoming would come from infinity
    if r_b_over_r is None:
        return out, out
    b = (x * x - l + lb) / (x * x) * r_b_over_r**2
    if b <= 0.0:
        return out, out  # never reaches the boundary
    c_reach = np.sqrt(max(0.0, 1.0 - min(b, 1.0)))
    return out, max(0.0, c_reach - np.sqrt(1.0 - a))


def density(T, h, boundary):
    """n(r)/n_c at altitude h (m) by velocity-space integration."""
    r = R + h
    lc, l = lam(T, R), lam(T, r)
    lb = lam(T, boundary * R) if boundary else 0.0
    rb = boundary * R / r if boundary else None
    s_r = r / R

    def f(x):
        o, i = c_lengths(x, s_r, lc, l, lb, rb)
        return 4.0 / np.sqrt(np.pi) * x * x * np.exp(-x * x) * 0.5 * (o + i)

    # Break at the escape speed (x^2 = lambda), where the integrand jumps,
    # and at the speeds where the boundary is just reached.
    pts = [np.sqrt(l)]
    if boundary:
        pts.append(np.sqrt(l - lb))
    pts = sorted(p for p in pts if 0.0 < p < 10.0)
    edges = [0.0] + pts + [10.0]
    tot = sum(
        quad(f, lo, hi, epsabs=1e-13, epsrel=1e-10, limit=400)[0]
        for lo, hi in zip(edges[:-1], edges[1:])
    )
    return np.exp(-(lc - l)) * tot


def main():
    # quad reports round-off near its 1e-10 target; the agreement of the
    # integral with the closed form (printed) is the check of accuracy.
    warnings.filterwarnings("ignore", category=IntegrationWarning)
    T = 2000.0
    lc = lam(T, R)
    print(f"Na over the Moon at {T} K: lambda_c = {lc:.6f}")
    n0_inf = density(T, 0.0, None)
    n0_b = density(T, 0.0, 20.0)
    cf0, cb0 = closed_form(lc, lc)
    print(f"surface: closed form {cf0:.8f}, integral {n0_inf:.8f}, "
          f"with 20 R boundary {n0_b:.8f}")
    for h_km in [1000.0, 2500.0]:
        h = h_km * 1e3
        l = lam(T, R + h)
        cf, cb = closed_form(lc, l)
        inf = density(T, h, None)
        b = density(T, h, 20.0)
        ratio_inf = inf / n0_inf
        ratio_b = b / n0_b
        print(
            f"{h_km:6.0f} km: closed form n/n_c {cf:.8f} (integral {inf:.8f}); "
            f"n/n(0): infinite {ratio_inf:.8f}, 20 R boundary {ratio_b:.8f}, "
            f"correction {ratio_b / ratio_inf:.6f}; ballistic only "
            f"{cb / cb0:.8f} "
            f"(escaping share {1 - cb / cf:.4f})"
        )


def bin_means(T):
    """The engine test's bins: volume means of the closed form over [975,
    1025] and [2450, 2550] km relative to [0, 10] km, ballistic plus
    escaping and ballistic only (what the remove-at-launch shortcut gives)."""
    lc = lam(T, R)

    def mean(part, lo, hi):
        f = lambda h: closed_form(lc, lam(T, R + h))[part] * (R + h) ** 2
        return quad(f, lo, hi, epsrel=1e-12)[0] / (((R + hi) ** 3 - (R + lo) ** 3) / 3.0)

    for part, name in [(0, "ballistic + escaping"), (1, "ballistic only")]:
        n0 = mean(part, 0.0, 10e3)
        vals = [mean(part, lo * 1e3, hi * 1e3) / n0 for lo, hi in [(975, 1025), (2450, 2550)]]
        print(f"bin means, {name}: 1000 km {vals[0]:.8f}, 2500 km {vals[1]:.8f}")


if __name__ == "__main__":
    bin_means(2000.0)
    main()
