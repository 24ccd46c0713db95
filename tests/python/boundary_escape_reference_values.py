"""Why this exists: `escape_is_booked_apart_from_bound_atoms_leaving` in
tests/engine.rs launches a Maxwellian flux from the surface of a still Moon
(every returning atom sticks) and checks the two ways an atom leaves the
model's domain at its outer boundary r_b:

- escape (unbound paths): the Jeans flux fraction (1 + lambda) exp(-lambda)
  (Jeans' escape law; Chamberlain & Hunten 1987, Theory of Planetary
  Atmospheres, ch. 7);
- bound paths whose apocentre lies beyond r_b: the fraction of the flux
  that reaches r_b, minus the escaping fraction.

A path launched from R with speed v at angle theta from the vertical
reaches r_b iff its radial kinetic energy there is >= 0 (energy and
angular momentum conservation): v^2 - v_b^2 >= (R / r_b)^2 v^2 sin^2(theta),
v_b^2 = 2 GM (1/R - 1/r_b). A Maxwellian flux has speeds with density
proportional to v^3 exp(-v^2/a^2) and directions with density
2 sin(theta) cos(theta), so sin^2(theta) is uniform on [0, 1]; with
x = v^2/a^2, k = (R/r_b)^2 and x_b = lambda (1 - R/r_b), the fraction is

  P = [exp(-x_b) - (1 + x_1 - x_b) exp(-x_1)] / k + (1 + x_1) exp(-x_1),
  x_1 = x_b / (1 - k),

checked here against direct quadrature.

Constants: CODATA via scipy.constants; Moon GM and radius from JPL's
planetary and satellite physical parameters (DE440); K mass 39.0983 u (IUPAC).

Run: python3 tests/python/boundary_escape_reference_values.py
"""

import numpy as np
from scipy import constants as C
from scipy.integrate import quad

MU = 4902.800e9  # m^3 s^-2
R = 1737.4e3  # m


def fractions(mass_u, T, radii):
    lam = MU * mass_u * C.atomic_mass / (C.k * T * R)
    k = radii**-2
    xb = lam * (1.0 - 1.0 / radii)
    x1 = xb / (1.0 - k)
    closed = (np.exp(-xb) - (1.0 + x1 - xb) * np.exp(-x1)) / k + (1.0 + x1) * np.exp(-x1)

    def g(x):
        return x * np.exp(-x) * min(1.0, (1.0 - xb / x) / k) if x > xb else 0.0

    numeric = quad(g, xb, x1, epsabs=1e-15)[0] + quad(g, x1, 60.0, epsabs=1e-15)[0]
    jeans = (1.0 + lam) * np.exp(-lam)
    return lam, jeans, closed, numeric


def main():
    for name, m, T, radii in [("K", 39.0983, 2000.0, 20.0), ("Na", 22.98976928, 1500.0, 20.0)]:
        lam, jeans, closed, numeric = fractions(m, T, radii)
        print(
            f"{name} {T} K, boundary {radii} R: lambda {lam:.6f}; escape (Jeans) {jeans:.8e}; "
            f"reaches boundary {closed:.8e} (quadrature {numeric:.8e}); "
            f"bound and leaving {closed - jeans:.8e}; ratio {closed / jeans:.4f}"
        )


if __name__ == "__main__":
    main()
