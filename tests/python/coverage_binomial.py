"""Binomial tail probabilities behind the fit coverage test
(tests/sweep_fit.rs, fit_intervals_cover_the_truth).

Twenty independent fits; each 1-sigma interval holds the truth with
probability 0.6827, each 2-sigma interval with 0.9545 (normal
distribution). Run with scipy (run with scipy 1.17.1):

    python3 tests/python/coverage_binomial.py
"""
from scipy.stats import binom, norm

p1 = norm.cdf(1) - norm.cdf(-1)
p2 = norm.cdf(2) - norm.cdf(-2)
print(f"p(1 sigma) = {p1:.4f}, p(2 sigma) = {p2:.4f}")
print(f"P(X <= 10 | 20, p1) = {binom.cdf(10, 20, p1):.4f}")
print(f"P(X >= 18 | 20, p1) = {binom.sf(17, 20, p1):.4f}")
print(f"P(X <= 16 | 20, p2) = {binom.cdf(16, 20, p2):.4f}")
