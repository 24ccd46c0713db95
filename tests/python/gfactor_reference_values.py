"""Why this exists: the built-in g-factor tables in host/src/radiation/tables.rs
and the radiation-pressure checks in host/src/radiation/ are computed here, so
that every number in them can be traced.

1. Momentum per scattered photon, h / (m lambda), for the Na and K resonance
   lines, with CODATA constants (scipy.constants) and the IUPAC atomic
   weights (22.98976928 u for Na, 39.0983 u for K).
2. The "continuum" g-factor of each line at 1 AU: the rate at which an atom
   would scatter if the solar spectrum had no Fraunhofer line there,
       g_cont = (pi e^2 / (4 pi eps0 m_e c)) f Phi_nu,
       Phi_nu = F_lambda lambda^3 / (h c^2)   (photons m^-2 s^-1 Hz^-1),
   with F_lambda the solar spectral irradiance at 1 AU (Mitchell & Zemansky
   1934, Resonance Radiation and Excited Atoms, for the integrated
   absorption cross section pi e^2 f / (m_e c) in CGS units).
   F_lambda: about 1.85 W m^-2 nm^-1 at 589 nm and about 1.25 W m^-2 nm^-1
   at 767-770 nm (from memory: Neckel & Labs 1984, Solar Physics 90, 205;
   good to about 5 per cent).
3. The residual intensity R(v) of the solar Fraunhofer line seen by an atom
   with heliocentric radial velocity v (the disk-integrated solar spectrum,
   taken as symmetric about the line centre): FROM MEMORY. For Na D2 the
   core leaves about 5 per cent of the continuum (Kurucz et al. 1984, Solar
   Flux Atlas from 296 to 1300 nm, from memory) and the wings are shaped so
   that the radiation acceleration at Mercury peaks near half of its surface
   gravity, as the Mercury sodium-tail literature reports (Smyth & Marconi
   1995, ApJ 441, 839; Potter, Killen & Morgan 2002, Meteoritics & Planet.
   Sci. 37, 1165: up to about 54 per cent of g0; from memory). Na D1 is the
   weaker solar line: its profile is D2's narrowed by the factor 0.88 in
   velocity (from memory). The K lines are far weaker in the solar spectrum:
   a Gaussian dip of depth 0.75 (D2) and 0.70 (D1) with 1/e half-widths of
   4.5 and 4.0 km/s: LOW CONFIDENCE, from memory, a factor of about 3.
   The tables are g = g_cont * R(v), rounded to 3 significant figures.
4. Mercury checks: the radiation acceleration of an atom at rest relative to
   Mercury over its orbit (a = 0.387098 AU, e = 0.205630: JPL approximate
   Keplerian elements, Standish & Williams), with v_r = sqrt(GM_sun / p) e
   sin(nu) and r = p / (1 + e cos nu), against g0 = 3.70 m/s^2.

Run: python3 tests/python/gfactor_reference_values.py
"""

import numpy as np
from scipy import constants as C

U = C.physical_constants["atomic mass constant"][0]
H = C.h
RE_C = C.e**2 / (4 * np.pi * C.epsilon_0 * C.m_e * C.c)  # r_e c, m^2 s^-1
SIGMA_INT = np.pi * RE_C  # integrated cross section per unit f, m^2 Hz

LINES = {
    # name: (mass u, vacuum wavelength m (NIST / Banerjee et al. 2004), f, F_lambda W m^-2 nm^-1)
    "Na D2": (22.98976928, 589.158e-9, 0.641, 1.85),
    "Na D1": (22.98976928, 589.756e-9, 0.320, 1.85),
    "K D2": (39.0983, 766.702e-9, 0.682, 1.25),
    "K D1": (39.0983, 770.109e-9, 0.339, 1.25),
}

# Residual intensity of the solar Na D2 line against |v| (km/s), from memory.
NA_D2_R = [
    (0, 0.050), (1, 0.053), (2, 0.062), (3, 0.078), (4, 0.102), (5, 0.135),
    (6, 0.178), (7, 0.230), (8, 0.290), (9, 0.370), (10, 0.450), (11, 0.515),
    (12, 0.570), (13, 0.620), (14, 0.660), (15, 0.695), (17, 0.750),
    (20, 0.810), (25, 0.870), (30, 0.905), (40, 0.945), (50, 0.965), (60, 0.975),
]
VELOCITIES = [v for v, _ in NA_D2_R]
D1_NARROWING = 0.88


def r_na_d2(v):
    xs, ys = zip(*NA_D2_R)
    return np.interp(abs(v), xs, ys)


def r_na_d1(v):
    return r_na_d2(abs(v) / D1_NARROWING)


def r_k(depth, width):
    return lambda v: 1.0 - depth * np.exp(-((v / width) ** 2))


PROFILES = {
    "Na D2": r_na_d2,
    "Na D1": r_na_d1,
    "K D2": r_k(0.75, 4.5),
    "K D1": r_k(0.70, 4.0),
}


def sig3(x):
    return float("%.3g" % x)


def momentum(name):
    m_u, lam, _, _ = LINES[name]
    return H / (m_u * U * lam)


def g_cont(name):
    _, lam, f, flam = LINES[name]
    phi_nu = flam * 1e9 * lam**3 / (H * C.c**2)
    return SIGMA_INT * f * phi_nu


TABLES = {name: [sig3(g_cont(name) * PROFILES[name](v)) for v in VELOCITIES] for name in LINES}


def table_g(name, v_km_s):
    return np.interp(abs(v_km_s), VELOCITIES, TABLES[name])


def accel(species, v_km_s, r_au):
    return sum(
        momentum(n) * table_g(n, v_km_s) / r_au**2 for n in LINES if n.startswith(species + " ")
    )


print("h/(m lambda), cm s^-2 per photon s^-1:")
for n in LINES:
    print("  %-6s %.5f" % (n, momentum(n) * 100))
print("continuum g at 1 AU, photons s^-1 atom^-1:")
for n in LINES:
    print("  %-6s %.3f" % (n, g_cont(n)))
print("tables (velocity km/s: g at 1 AU):")
print("  v     " + " ".join("%8s" % n for n in LINES))
for i, v in enumerate(VELOCITIES):
    print("  %-5g " % v + " ".join("%8.3g" % TABLES[n][i] for n in LINES))

print("Na radiation acceleration, m s^-2:")
for label, r in [("perihelion", 0.3075), ("aphelion", 0.4667)]:
    for v in (-10.0, 0.0, 10.0):
        print("  %-10s r %.4f AU, v_r %+5.1f km/s: %.5f" % (label, r, v, accel("Na", v, r)))

GM_SUN = 1.32712440018e20
A_M = 0.387098 * C.astronomical_unit
E_M = 0.205630
P_M = A_M * (1 - E_M**2)
G0 = 3.70
nu = np.radians(np.arange(0.0, 360.0, 0.25))
r = P_M / (1 + E_M * np.cos(nu)) / C.astronomical_unit
vr = np.sqrt(GM_SUN / P_M) * E_M * np.sin(nu) / 1e3
ratio = np.array([accel("Na", v, x) for v, x in zip(vr, r)]) / G0
k = int(np.argmax(ratio))
print(
    "Mercury, atom at rest: max a/g0 = %.3f at nu %.2f deg (r %.4f AU, v_r %.2f km/s)"
    % (ratio[k], np.degrees(nu[k]), r[k], vr[k])
)
print("  a/g0 at perihelion %.4f, at aphelion %.4f" % (ratio[0], ratio[len(nu) // 2]))
kk = int(np.argmin(ratio))
print("  min a/g0 = %.4f at nu %.2f deg" % (ratio[kk], np.degrees(nu[kk])))
