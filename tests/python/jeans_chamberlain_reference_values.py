"""Why this exists: tests/engine.rs checks the engine's escaping fraction
against Jeans' escape law and its density profile against Chamberlain's
collisionless exosphere, with numbers stated beside the assertions. This
script recomputes those numbers, and checks each a second way, so that a
reader can regenerate them; it exits with status 1 if a stated number no
longer matches.

- Jeans parameter lambda = G M m / (k T R) and the fraction of a Maxwellian
  flux above the escape speed, (1 + lambda) exp(-lambda) =
  scipy.special.gammaincc(2, lambda) (Jeans' escape law; Chamberlain &
  Hunten 1987, Theory of Planetary Atmospheres, 2nd ed., Academic Press,
  ch. 7). Second route: direct quadrature of the flux distribution
  x exp(-x) in x = v^2/a^2 above x = lambda.
- n(h)/n(surface) of a ballistic plus escaping exosphere with the exobase
  at the surface (Chamberlain 1963, Planet. Space Sci. 11, 901, eqs. for
  zeta_bal and zeta_esc, as restated by Chamberlain & Hunten 1987 ch. 7).
  Second route: the velocity-space integration of
  tests/python/chamberlain_reference_values.py at 1200 K.

Constants: CODATA via scipy.constants (k_B exact; u as scipy carries it);
Moon GM = 4902.800 km^3 s^-2 and mean radius 1737.4 km (JPL planetary and
satellite physical parameters, DE440); Na 22.98976928 u (IUPAC standard
atomic weight).

Versions used when the values were computed and last checked: Python 3.11.7,
scipy 1.17.1, numpy 2.4.6 (printed at run time).

Run: python3 tests/python/jeans_chamberlain_reference_values.py
"""

import sys

import numpy as np
import scipy
from scipy import constants as C
from scipy.integrate import quad
from scipy.special import gammainc, gammaincc

MU = 4902.800e9  # m^3 s^-2
R = 1737.4e3  # m
M_NA = 22.98976928 * C.atomic_mass  # kg

FAILURES = []


def check(name, got, stated, rel):
    ok = abs(got / stated - 1.0) <= rel
    print(f"{'ok  ' if ok else 'FAIL'} {name}: computed {got:.9g}, stated {stated:.9g}")
    if not ok:
        FAILURES.append(name)


def lam(T, r):
    return MU * M_NA / (C.k * T * r)


def chamberlain(lc, l):
    """n(r)/n_c, ballistic + escaping, exobase at the surface (Chamberlain 1963)."""
    P = lambda x: gammainc(1.5, x)
    psi = l * l / (l + lc)
    F = np.sqrt(lc * lc - l * l) / lc * np.exp(-psi)
    bal = P(l) - F * P(l - psi)
    esc = 0.5 * (1.0 - P(l) - F * (1.0 - P(l - psi)))
    return np.exp(-(lc - l)) * (bal + esc)


def main():
    print(f"python {sys.version.split()[0]}, scipy {scipy.__version__}, numpy {np.__version__}")
    for T, stated_lam, stated_frac in [(1200.0, 6.502248, 1.125384e-2), (3000.0, 2.600899, 2.672113e-1)]:
        l = lam(T, R)
        check(f"lambda, Na, Moon, {T} K", l, stated_lam, 1e-6)
        check(f"Jeans flux fraction (1 + l) exp(-l), {T} K", (1 + l) * np.exp(-l), stated_frac, 1e-6)
        check(f"... gammaincc(2, l), {T} K", gammaincc(2, l), stated_frac, 1e-6)
        numeric = quad(lambda x: x * np.exp(-x), l, np.inf)[0]
        check(f"... quadrature of x exp(-x) above l, {T} K", numeric, stated_frac, 1e-6)
    lc = lam(1200.0, R)
    n0 = chamberlain(lc, lc)
    check("zeta(lambda_c), Na, Moon, 1200 K", n0, 0.99768655, 1e-8)
    for h_km, stated in [(100.0, 0.690347), (500.0, 0.217101), (1000.0, 0.0779993), (2000.0, 0.0200217)]:
        got = chamberlain(lc, lam(1200.0, R + h_km * 1e3)) / n0
        check(f"n({h_km:.0f} km)/n(0), Na, Moon, 1200 K", got, stated, 1e-5)
    if FAILURES:
        print(f"{len(FAILURES)} value(s) do not match: {', '.join(FAILURES)}")
        sys.exit(1)
    print("every stated value matches")


if __name__ == "__main__":
    main()
