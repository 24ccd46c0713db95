"""Why this exists: the worked ballistic hops in host/src/transport/kepler.rs
(`worked_hops_match_the_range_equation`) are checked against numbers computed here
from the two-body range equation (Bate, Mueller & White 1971, Fundamentals
of Astrodynamics, ch. 6) and, independently, by integrating the two-body
equations of motion with scipy's solve_ivp until the atom is back at the
surface. Body constants: GM and mean radius from JPL's planetary and
satellite physical parameters (DE440).

Run: python3 tests/python/hop_reference_values.py
"""

import numpy as np
from scipy.integrate import solve_ivp

BODIES = {"Moon": (4902.800e9, 1737.4e3), "Mercury": (22031.86855e9, 2439.4e3)}


def range_equation(mu, R, v, el):
    nu = v * v * R / mu
    a = R / (2.0 - nu)
    e = np.sqrt(1.0 - nu * (2.0 - nu) * np.cos(el) ** 2)
    psi = 2.0 * np.arccos((1.0 - nu * np.cos(el) ** 2) / e)
    e1 = np.arccos((nu - 1.0) / e)
    tof = 2.0 * np.sqrt(a**3 / mu) * (np.pi - e1 + e * np.sin(e1))
    return psi, R * psi, tof, a * (1.0 + e) - R


def integrated(mu, R, v, el):
    def f(t, y):
        r = np.hypot(y[0], y[1])
        return [y[2], y[3], -mu * y[0] / r**3, -mu * y[1] / r**3]

    def land(t, y):
        return np.hypot(y[0], y[1]) - R

    land.terminal, land.direction = True, -1
    y0 = [0.0, R, v * np.cos(el), v * np.sin(el)]
    s = solve_ivp(f, (0, 1e6), y0, events=land, rtol=1e-12, atol=1e-6, dense_output=True)
    t = s.t_events[0][0]
    yl = s.y_events[0][0]
    psi = np.arctan2(yl[0], yl[1]) % (2 * np.pi)
    ts = np.linspace(0, t, 20001)
    hmax = np.max(np.hypot(*s.sol(ts)[:2])) - R
    return psi, R * psi, t, hmax


for name, v in [("Moon", 1000.0), ("Moon", 2000.0), ("Mercury", 1000.0)]:
    mu, R = BODIES[name]
    a = range_equation(mu, R, v, np.pi / 4)
    b = integrated(mu, R, v, np.pi / 4)
    print(
        "%s %4.0f m/s 45 deg: Psi %.6f rad, range %.2f km, TOF %.2f s, h_max %.2f km"
        % (name, v, a[0], a[1] / 1e3, a[2], a[3] / 1e3)
    )
    print("   integrated:        Psi %.6f rad, range %.2f km, TOF %.2f s, h_max %.2f km"
          % (b[0], b[1] / 1e3, b[2], b[3] / 1e3))
