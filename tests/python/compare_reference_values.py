"""Reference values for the Student-t p-values and quantiles of
`exobound compare` (host/src/compare/stats.rs, test
student_t_and_holm_against_scipy). Run with scipy 1.17.1:

    python3 tests/python/compare_reference_values.py
"""
from scipy import stats

for t, dof in [(2.0, 1), (30.0, 1), (2.5, 4), (1.0, 30)]:
    print(f"2 * t.sf({t}, {dof}) = {2 * stats.t.sf(t, dof)!r}")
for alpha, dof in [(0.01, 1), (0.01 / 11, 1)]:
    print(f"t.ppf(1 - {alpha}/2, {dof}) = {stats.t.ppf(1 - alpha / 2, dof)!r}")
