"""Why this exists: the standard process modules (processes/*/src/lib.rs)
carry reference values in their manifests and unit tests that were computed
rather than read from a paper: closed forms evaluated to many digits,
quadratures of launch distributions, medians found by root finding. This
script recomputes every one of them, so that a reader can see where each
number comes from and regenerate it, and it fails (exit status 1) if any
value stated in the Rust code no longer matches.

Each value is computed with mpmath at 40 significant digits and, where a
general-purpose library offers the distribution, checked a second way with
scipy (scipy.stats.betaprime, scipy.stats.chi, scipy.integrate.quad,
scipy.special.erf).

Versions used when the values were computed and last checked: Python 3.11.7,
mpmath 1.3.0, scipy 1.17.1, numpy 2.4.6 (printed at run time).

Constants are the SDK's (process-sdk/src/constants.rs), so that the Rust
code and this script evaluate the same numbers: k_B = 1.380649e-23 J/K and
e = 1.602176634e-19 C (exact in the SI since 2019), u = 1.66053906660e-27 kg
(CODATA 2018 recommended value). Masses: the IUPAC standard atomic weights
of Na (22.98976928) and K (39.0983); the proton 1.007276 u (CODATA, from
memory). Sources of the laws are named beside each block.

Run: python3 tests/python/module_reference_values.py
"""

import math
import sys

import mpmath as mp
import numpy as np
import scipy
from scipy import integrate, special, stats

mp.mp.dps = 40

K_B = mp.mpf("1.380649e-23")  # J/K
EV = mp.mpf("1.602176634e-19")  # J
U_ATOMIC = mp.mpf("1.66053906660e-27")  # kg
M_NA = mp.mpf("22.98976928") * U_ATOMIC  # kg
PROTON_U = mp.mpf("1.007276")  # u
NA_U = mp.mpf("22.98976928")  # u

FAILURES = []


def check(name, got, stated, rel=None, absolute=None):
    """Compares a computed value with the one the Rust code states."""
    got = float(got)
    if absolute is not None:
        ok = abs(got - stated) <= absolute
    else:
        ok = abs(got - stated) <= (rel if rel is not None else 1e-12) * abs(stated)
    mark = "ok  " if ok else "FAIL"
    print(f"{mark} {name}: computed {got:.16g}, stated {stated:.16g}")
    if not ok:
        FAILURES.append(name)


def photoionization():
    # r^-2 scaling of a rate at 1 AU (Huebner et al. 1992, Astrophys. Space
    # Sci. 195, 1); Mercury q = a(1 - e) and Q = a(1 + e) with a = 0.387098 AU,
    # e = 0.20563 (NASA NSSDCA Mercury fact sheet).
    print("photoionization")
    q, big_q = mp.mpf("0.3075"), mp.mpf("0.4667")
    check("q = a(1 - e), AU", mp.mpf("0.387098") * (1 - mp.mpf("0.20563")), 0.30750, absolute=5e-6)
    check("Q = a(1 + e), AU", mp.mpf("0.387098") * (1 + mp.mpf("0.20563")), 0.46670, absolute=5e-6)
    check("5.92e-6 / q^2", mp.mpf("5.92e-6") / q**2, 6.2608235838456e-5)
    check("0.5 * 5.92e-6 / Q^2", mp.mpf("0.5") * mp.mpf("5.92e-6") / big_q**2, 1.35898952517503e-5)
    check("7.26e-6 / q^2", mp.mpf("7.26e-6") / q**2, 7.677969462621456e-5)
    check("(Q/q)^2", (big_q / q) ** 2, 2.3035, absolute=5e-5)
    check("lifetime 1 / 5.92e-6, s", 1 / mp.mpf("5.92e-6"), 1.69e5, absolute=0.005e5)


def power_law_cdf(eps, beta):
    """CDF of f(E) = beta (beta + 1) U^beta E / (E + U)^(beta + 2) at eps = E/U."""
    return 1 - (1 + (1 + beta) * eps) / (1 + eps) ** (1 + beta)


def photon_desorption():
    # PSD flux Q F_UV N_s cos(SZA) with Q F_UV = 4.5e-6 s^-1 at 1 AU
    # (Yakshinskiy & Madey 1999, Nature 400, 642, as used in Leblanc &
    # Johnson 2003, Icarus 164, 261); power-law energy form of Johnson et al.
    # 2002, Icarus 156, 136 (from memory), which is betaprime(2, beta, scale U).
    print("photon-desorption")
    check("4.5e-6 / 0.3075^2 * 0.5 * 1e10", mp.mpf("4.5e-6") / mp.mpf("0.3075") ** 2 * mp.mpf("0.5") * mp.mpf("1e10"), 237953.5990481856)
    ta = mp.mpf("0.1") * EV / K_B
    check("E_a/k for 0.1 eV, K", ta, 1160.45, absolute=0.005)
    factor = mp.exp(ta * (mp.mpf(1) / 300 - mp.mpf(1) / 600))
    check("temperature factor at 600 K (T_ref 300 K)", factor, 6.917720816438167)
    check("4.5e4 * factor", mp.mpf("4.5e4") * factor, 311297.4367397175)
    check("exp(-E_a/k / 300) at 150 K", mp.exp(-ta / 300), 0.020897, absolute=5e-7)
    # Mean speed of the power-law form, beta = 3: sqrt(2U/m) E[(E/U)^(1/2)],
    # E[X^(1/2)] = Gamma(5/2) Gamma(beta - 1/2) / Gamma(beta) for betaprime(2, beta).
    u, beta = mp.mpf("0.052"), mp.mpf(3)
    moment = mp.gamma(mp.mpf(5) / 2) * mp.gamma(beta - mp.mpf(1) / 2) / mp.gamma(beta)
    v = mp.sqrt(2 * u * EV / M_NA) * moment
    check("power-law mean speed, beta 3, U 0.052 eV, m/s", v, 583.7439804849202)
    check("... equals sqrt(2U/m) 9 pi / 32", mp.sqrt(2 * u * EV / M_NA) * 9 * mp.pi / 32, 583.7439804849202)
    quad_v = mp.quad(lambda e: mp.sqrt(2 * e * EV / M_NA) * beta * (beta + 1) * u**beta * e / (e + u) ** (beta + 2), [0, u, 100 * u, mp.inf])
    check("... by quadrature of the density", quad_v, 583.7439804849202)
    d = stats.betaprime(2, 3.0, scale=0.052)
    check("... scipy betaprime(2, 3) mean of sqrt(2E/m)", d.expect(lambda e: math.sqrt(2 * e * 1.602176634e-19 / float(M_NA))), 583.7439804849202, rel=1e-9)
    # beta = 0.7, U = 0.052 eV.
    u, beta = mp.mpf("0.052"), mp.mpf("0.7")
    check("CDF(0.1 eV)", power_law_cdf(mp.mpf("0.1") / u, beta), 0.31068, absolute=5e-6)
    median = u * mp.findroot(lambda x: power_law_cdf(x, beta) - mp.mpf("0.5"), 4)
    check("median, eV", median, 0.21282, absolute=5e-6)
    check("mode U/(1 + beta), eV", u / (1 + beta), 0.03059, absolute=5e-6)
    d = stats.betaprime(2, 0.7, scale=0.052)
    check("scipy betaprime(2, 0.7) CDF(0.1 eV)", d.cdf(0.1), 0.31068, absolute=5e-6)
    check("scipy betaprime(2, 0.7) median, eV", d.median(), 0.21282, absolute=5e-6)
    check("CDF(1e-8 U)", power_law_cdf(mp.mpf("1e-8"), beta), 6e-17, rel=0.1)
    check("1 - CDF(1e10 U)", 1 - power_law_cdf(mp.mpf("1e10"), beta), 1.7e-7, rel=0.05)
    check("fraction above 100 eV", 1 - power_law_cdf(100 / u, beta), 0.01, rel=0.2)
    # Low-energy CDF values, both sides of the Taylor switch in ln_survival.
    for eps, b, want in [
        ("1e-5", "0.7", 5.949892901485994e-11),
        ("0.0058", "0.7", 1.980850455264847e-5),
        ("0.006", "0.7", 2.1190575492122934e-5),
        ("3.0", "0.7", 0.4221330590179107),
        ("1e-7", "0.1", 5.49999923000009e-16),
    ]:
        check(f"CDF(eps = {eps}, beta = {b})", power_law_cdf(mp.mpf(eps), mp.mpf(b)), want, rel=1e-15)


def sigmund_thompson(e, u):
    """Density 2 U E / (E + U)^3 (Sigmund 1969, Phys. Rev. 184, 383; Thompson 1968, Phil. Mag. 18, 377)."""
    return 2 * u * e / (e + u) ** 3


def ion_sputter():
    print("ion-sputter")
    u = mp.mpf("0.27")
    lam = 4 * PROTON_U * NA_U / (PROTON_U + NA_U) ** 2
    top = lam * 1000
    check("Lambda E_i, 1 keV H+ on Na, eV", top, 160.85240122145326)
    w = lambda e, l: 1 - mp.sqrt((e + u) / l)
    # Acceptance of the rejection step: <w> over the Sigmund-Thompson law cut at
    # L - U, divided by the maximum of w, 1 - sqrt(U/L).
    for mult, stated in [(2, 0.42), (10, 0.64), (100, 0.85)]:
        l = mult * u
        num = mp.quad(lambda e: sigmund_thompson(e, u) * w(e, l), [0, l - u])
        den = mp.quad(lambda e: sigmund_thompson(e, u), [0, l - u])
        check(f"acceptance at Lambda E_i = {mult} U", num / den / (1 - mp.sqrt(u / l)), stated, absolute=0.005)
    # Hard cutoff at 2.7 eV.
    cut = mp.mpf("2.7")
    z = mp.quad(lambda e: sigmund_thompson(e, u), [0, cut])
    check("CDF(2.7 eV) = (2.7/2.97)^2", z, float((cut / (cut + u)) ** 2), rel=1e-15)
    mean_e = mp.quad(lambda e: e * sigmund_thompson(e, u), [0, cut]) / z
    check("mean energy, hard cutoff 2.7 eV, eV", mean_e, 0.70278, absolute=5e-6)
    speed = lambda e: mp.sqrt(2 * e * EV / M_NA)
    mean_v = mp.quad(lambda e: speed(e) * sigmund_thompson(e, u), [0, u, cut]) / z
    check("mean speed, hard cutoff 2.7 eV, m/s", mean_v, 2193.557795088484)
    mean_v2 = mp.quad(lambda e: speed(e) ** 2 * sigmund_thompson(e, u), [0, u, cut]) / z
    check("relative sd of the speed, hard cutoff", mp.sqrt(mean_v2 - mean_v**2) / mean_v, 0.48, absolute=0.005)
    # Thompson cutoff, 1 keV protons.
    f = lambda e: sigmund_thompson(e, u) * w(e, top)
    norm = mp.quad(f, [0, u, 10 * u, top - u])
    check("normalisation of the cut law", norm, 0.8941023030977734)
    mean_v = mp.quad(lambda e: speed(e) * f(e), [0, u, 10 * u, top - u]) / norm
    check("mean speed, Thompson cutoff, m/s", mean_v, 2986.224711175713)
    mean_v2 = mp.quad(lambda e: speed(e) ** 2 * f(e), [0, u, 10 * u, top - u]) / norm
    check("relative sd of the speed, Thompson cutoff", mp.sqrt(mean_v2 - mean_v**2) / mean_v, 0.87, absolute=0.005)
    mean_e = mp.quad(lambda e: e * f(e), [0, u, 10 * u, top - u]) / norm
    check("mean energy, Thompson cutoff, eV", mean_e, 1.8752716, absolute=5e-8)
    median = mp.findroot(lambda x: mp.quad(f, [0, x]) / norm - mp.mpf("0.5"), mp.mpf("0.6"))
    check("median, Thompson cutoff, eV", median, 0.597438, absolute=5e-7)
    # Uncut law: median (1 + sqrt 2) U, scipy betaprime(2, 1, scale=U).
    check("median (1 + sqrt 2) U, eV", (1 + mp.sqrt(2)) * u, 0.65184, absolute=5e-6)
    check("scipy betaprime(2, 1) median, eV", stats.betaprime(2, 1, scale=0.27).median(), 0.65184, absolute=5e-6)
    # Second route for the hard-cutoff mean speed: scipy quad.
    zf = (2.7 / 2.97) ** 2
    mv = integrate.quad(lambda e: math.sqrt(2 * e * 1.602176634e-19 / float(M_NA)) * 2 * 0.27 * e / (e + 0.27) ** 3, 0, 2.7, epsabs=1e-13, epsrel=1e-13)[0] / zf
    check("scipy quad: mean speed, hard cutoff, m/s", mv, 2193.557795088484, rel=1e-9)
    # Surface fraction: 0.4 wt% Na2O, 21.5 u per atom of silicate.
    na2o = 2 * mp.mpf("22.98977") + mp.mpf("15.999")
    check("Na atomic fraction", mp.mpf("0.004") * 2 * mp.mpf("22.98977") / na2o * mp.mpf("21.5") / mp.mpf("22.98977"), 0.0028, absolute=0.5e-4)


def thermal_desorption():
    # nu exp(-U/kT), nu = 1e13 s^-1, U = 1.85 eV for Na (Hunten & Sprague 2002,
    # Meteoritics & Planet. Sci. 37, 1191; from memory).
    print("thermal-desorption")
    nu = mp.mpf("1e13")
    rate = lambda u, t: nu * mp.exp(-mp.mpf(u) * EV / (K_B * t))
    check("U 1.85 eV, 600 K, s^-1", rate("1.85", 600), 2.889e-3, absolute=0.5e-6)
    check("U 1.85 eV, 400 K, s^-1", rate("1.85", 400), 4.91e-11, absolute=0.5e-13)
    check("U 1.4 eV, 400 K, s^-1", rate("1.4", 400), 2.295e-5, absolute=0.5e-8)
    check("U 2.0 eV, 700 K, s^-1", rate("2.0", 700), 3.987e-2, absolute=0.5e-5)
    check("U/k for 1.85 eV, K", mp.mpf("1.85") * EV / K_B, 21468, absolute=0.5)
    check("U/kT at 100 K", mp.mpf("1.85") * EV / (K_B * 100), 214.7, absolute=0.05)

    def uniform(u0, w, t):
        kt = K_B * t / EV
        lo, hi = u0 - w, u0 + w
        return kt / (hi - lo) * (mp.exp(-lo / kt) - mp.exp(-hi / kt))

    def gaussian(u0, s, t):
        kt = K_B * t / EV
        r = s / kt
        phi = lambda x: mp.ncdf(x)
        return mp.exp(-u0 / kt + r * r / 2) * (phi(3 - r) - phi(-3 - r)) / (phi(3) - phi(-3))

    def gaussian_quad(u0, s, t):
        kt = K_B * t / EV
        g = lambda u: mp.exp(-((u - u0) / s) ** 2 / 2) * mp.exp(-u / kt)
        n = lambda u: mp.exp(-((u - u0) / s) ** 2 / 2)
        return mp.quad(g, [u0 - 3 * s, u0, u0 + 3 * s]) / mp.quad(n, [u0 - 3 * s, u0, u0 + 3 * s])

    u0 = mp.mpf("1.85")
    check("uniform 1.85 +- 0.2 eV, 600 K, s^-1", nu * uniform(u0, mp.mpf("0.2"), 600), 1.786012342962136e-2)
    check("uniform 1.85 +- 0.2 eV, 400 K, s^-1", nu * uniform(u0, mp.mpf("0.2"), 400), 1.400502574724996e-9)
    check("uniform, 600 K, N_s 1e10", nu * uniform(u0, mp.mpf("0.2"), 600) * mp.mpf("1e10"), 178601234.2962136)
    for t, stated in [(600, 1.610652705437411e-2), (400, 1.785358922265082e-9)]:
        closed = nu * gaussian(u0, mp.mpf("0.1"), t)
        check(f"gaussian sigma 0.1 eV, {t} K, s^-1", closed, stated)
        rel = abs(closed / (nu * gaussian_quad(u0, mp.mpf("0.1"), t)) - 1)
        check(f"... closed form against quadrature, {t} K (relative difference)", rel, 0.0, absolute=1e-20)
    check("gaussian, 600 K, N_s 1e10", nu * gaussian(u0, mp.mpf("0.1"), 600) * mp.mpf("1e10"), 161065270.54374106)
    # Second route for the Gaussian average: scipy's erf.
    kt = 1.380649e-23 * 600 / 1.602176634e-19
    r = 0.1 / kt
    phi = lambda x: 0.5 * (1 + special.erf(x / math.sqrt(2)))
    g = math.exp(-1.85 / kt + r * r / 2) * (phi(3 - r) - phi(-3 - r)) / (phi(3) - phi(-3))
    check("scipy erf: gaussian, 600 K, s^-1", 1e13 * g, 1.610652705437411e-2, rel=1e-9)


def maxwellian_flux():
    # Speeds of the atoms crossing a plane out of a Maxwellian gas: density
    # proportional to v^3 exp(-v^2/a^2), a = sqrt(2kT/m), i.e. chi with 4
    # degrees of freedom and scale sqrt(kT/m); energy Gamma(2, kT) (kinetic
    # theory; e.g. Chamberlain & Hunten 1987, Theory of Planetary Atmospheres).
    # Used by thermal-desorption, photon-desorption, impact-vapor and
    # surface-accommodation at Na, 1200 K.
    print("Maxwellian flux, Na at 1200 K")
    a = mp.sqrt(2 * K_B * 1200 / M_NA)
    check("a, m/s", a, 931.66, absolute=0.005)
    check("<v> = (3 sqrt(pi)/4) a, m/s", 3 * mp.sqrt(mp.pi) / 4 * a, 1238.49, absolute=0.005)
    median = a * mp.sqrt(mp.findroot(lambda x: 1 - (1 + x) * mp.exp(-x) - mp.mpf("0.5"), 1.7))
    check("median, m/s", median, 1206.97, absolute=0.005)
    scale = math.sqrt(1.380649e-23 * 1200 / float(M_NA))
    check("scipy chi(4) median, m/s", stats.chi(df=4, scale=scale).median(), 1206.97, absolute=0.005)
    check("<E> = 2kT, eV", 2 * K_B * 1200 / EV, 0.20682, absolute=5e-6)
    check("sd(E) = sqrt(2) kT, eV", mp.sqrt(2) * K_B * 1200 / EV, 0.1462, absolute=5e-5)


def impact_vapor():
    # Maxwellian flux mean speed (3 sqrt(pi)/4) a, a = sqrt(2kT/m) (the flux of
    # a Maxwellian gas through a plane, e.g. Chamberlain & Hunten 1987, Theory
    # of Planetary Atmospheres); sphere average of cos^n(latitude) (Wallis).
    print("impact-vapor")
    a = mp.sqrt(2 * K_B * 3000 / M_NA)
    check("a at 3000 K, m/s", a, 1473.076873537, absolute=5e-9)
    check("<v> = (3 sqrt(pi)/4) a at 3000 K, m/s", 3 * mp.sqrt(mp.pi) / 4 * a, 1958.220582885396)
    scale = math.sqrt(1.380649e-23 * 3000 / float(M_NA))
    check("scipy chi(4) mean at 3000 K, m/s", stats.chi(df=4, scale=scale).mean(), 1958.220582885396, rel=1e-12)
    c50 = mp.sqrt(mp.pi) * mp.gamma(26) / (2 * mp.gamma(mp.mpf("26.5")))
    check("C(50)", c50, 0.17464095287360928)
    check("C(50) by quadrature", mp.quad(lambda t: mp.cos(t) ** 51, [-mp.pi / 2, 0, mp.pi / 2]) / 2, 0.17464095287360928)
    check("1e6 * 1.5 / (pi/4)", mp.mpf("1e6") * mp.mpf("1.5") * 4 / mp.pi, 1909859.317102744)


def regolith_diffusion():
    # N_b nu exp(-E_a/kT) f_enh (Arrhenius, common practice).
    print("regolith-diffusion")
    x600 = mp.mpf("2.7") * EV / (K_B * 600)
    x700 = mp.mpf("2.7") * EV / (K_B * 700)
    check("E_a/kT at 600 K", x600, 52.22033154697537)
    check("E_a/kT at 700 K", x700, 44.76028418312174)
    check("supply at 600 K", mp.mpf("1e29") * mp.exp(-x600), 2094103.612509285)
    check("supply at 700 K, b 0.5, f 5", mp.mpf("1e29") * mp.mpf("0.5") * mp.exp(-x700) * 5, 9094850812.875778)
    check("half-saturated, 600 K", mp.mpf("1e29") * mp.exp(-x600) / 2, 1047051.8062546425)
    check("supply at 390 K below 1e-3", mp.mpf("1e29") * mp.exp(-mp.mpf("2.7") * EV / (K_B * 390)), 0.0, absolute=1e-3)
    na2o = 2 * mp.mpf("22.989769") + mp.mpf("15.999")
    per_cm3 = 3 * mp.mpf("0.004") * 2 * mp.mpf("22.989769") / na2o / (NA_U * mp.mpf("1.66053906660e-24"))
    check("Na atoms per cm^3 of grain", per_cm3, 2.3e20, absolute=0.05e20)


def main():
    print(f"python {sys.version.split()[0]}, mpmath {mp.__version__}, scipy {scipy.__version__}, numpy {np.__version__}")
    photoionization()
    maxwellian_flux()
    photon_desorption()
    ion_sputter()
    thermal_desorption()
    impact_vapor()
    regolith_diffusion()
    if FAILURES:
        print(f"{len(FAILURES)} value(s) do not match: {', '.join(FAILURES)}")
        sys.exit(1)
    print("every stated value matches")


if __name__ == "__main__":
    main()
