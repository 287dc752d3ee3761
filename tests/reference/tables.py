"""Recomputes the table values the unit tests check against, with general-purpose libraries
(scipy for the statistical distributions, mpmath for the ziggurat constants) and plain
re-implementations of two published bit-level algorithms (SplitMix64, FNV-1a 64), so that the
tests' "[C]" tags can be confirmed. Run: python3 tests/reference/tables.py"""

from scipy import stats
import mpmath

print("Student t, two-sided 95 % points:")
for dof in (1, 2, 8, 30):
    print(f"  t_0.975,{dof} = {stats.t.ppf(0.975, dof):.6f}")
print(f"  t_0.995,10 = {stats.t.ppf(0.995, 10):.6f}")
print(f"normal z_0.975 = {stats.norm.ppf(0.975):.6f}")
print(f"chi-square, 3 dof, 95 % point = {stats.chi2.ppf(0.95, 3):.4f}")
for p in (0.10, 0.05, 0.01):
    print(f"Kolmogorov P(K > x) = {p}: x = {stats.kstwobign.isf(p):.4f}")
print(f"Exp(1) fourth central moment = {stats.expon.moment(4) - 4*stats.expon.moment(3) + 6*stats.expon.moment(2) - 3:.0f}")

# Ziggurat for the exponential density with 256 layers: r solves
# v(r) = f(r)(r + 1) and the recursion x_{i+1} = -ln(v/x_i + f(x_i)) reaching 0 at the top.
mpmath.mp.dps = 40
def top(r):
    v = mpmath.e ** (-r) * (r + 1)
    x = r
    for _ in range(254):
        x = -mpmath.log(v / x + mpmath.e ** (-x))
    return v / x + mpmath.e ** (-x) - 1
r = mpmath.findroot(top, 7.697)
print(f"ziggurat r = {mpmath.nstr(r, 17)}, v = {mpmath.nstr(mpmath.e**(-r)*(r+1), 17)}")

M = (1 << 64) - 1
def splitmix64(state):
    z = (state + 0x9E3779B97F4A7C15) & M
    z = ((z ^ (z >> 30)) * 0xBF58476D1CE4E5B9) & M
    z = ((z ^ (z >> 27)) * 0x94D049BB133111EB) & M
    return z ^ (z >> 31)
print(f"SplitMix64 first output from state 0 = {splitmix64(0):#018x}")

def fnv1a(data):
    h = 0xcbf29ce484222325
    for b in data:
        h = ((h ^ b) * 0x100000001b3) & M
    return h
for s in (b"", b"a", b"foobar"):
    print(f"FNV-1a 64 {s!r} = {fnv1a(s):016x}")
