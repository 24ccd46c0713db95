"""Why this exists: the sampler tests in process-sdk/src/sample.rs check
the Maxwellian-flux and Sigmund-Thompson samplers against a few numbers;
this script computes those numbers with scipy (a general-purpose reference
library), so that anyone can regenerate them. Constants: CODATA 2018/2022
exact k_B and the atomic mass constant; Na standard atomic weight (IUPAC).

Run: python3 tests/python/sampler_reference_values.py
"""

import numpy as np
from scipy import integrate, stats

K_B = 1.380649e-23  # J/K, exact (SI 2019)
U_ATOMIC = 1.66053906660e-27  # kg, CODATA 2018
M_NA = 22.98976928 * U_ATOMIC  # kg, IUPAC standard atomic weight
EV = 1.602176634e-19  # J, exact

# Maxwellian flux at 1200 K: speed ~ chi(4) with scale sqrt(kT/m), so the
# most probable speed parameter a = sqrt(2kT/m) and <v> = (3 sqrt(pi)/4) a.
T = 1200.0
scale = np.sqrt(K_B * T / M_NA)
print("Na 1200 K: a = %.2f m/s" % (np.sqrt(2.0) * scale))
print("Na 1200 K: <v> = %.2f m/s" % stats.chi(df=4, scale=scale).mean())

# Sigmund-Thompson f(E) = 2UE/(E+U)^3 (betaprime(2, 1) scaled by U).
U = 0.27  # eV
print("U = 0.27 eV: median = %.5f eV" % stats.betaprime(2, 1, scale=U).median())
f = lambda e: 2.0 * U * e / (e + U) ** 3
num = integrate.quad(lambda e: e * f(e), 0.0, 2.7)[0]
den = integrate.quad(f, 0.0, 2.7)[0]
print("U = 0.27 eV, cut at 2.7 eV: mean = %.5f eV" % (num / den))
