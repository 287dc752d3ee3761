"""Exact mean, standard deviation and fourth cumulant of every reported species of the SBML
test suite's stochastic cases that copyloop imports, at t = 0, 1, ..., 50.

Run: python3 tests/reference/sbml_stochastic_cumulants.py > tests/reference/sbml_stochastic_cumulants.csv
(sympy, mpmath). The Rust harness (tests/support/sbml_stochastic.rs) reads the CSV; it needs no
Python. With the suite's data present (argument: its `stochastic` directory) the script also
compares its means and standard deviations with the suite's results files and fails on a
difference, so the models below are the suite's.

The models are those of the discrete stochastic models test suite (Evans, Gillespie & Wilkinson
2008, Bioinformatics 24:285), in molecule counts and seconds:

- birth-death: X -> 2X at lam*X, X -> 0 (or -> Sink) at mu*X;
- immigration-death: 0 -> X at alpha, X -> 0 (or -> Sink) at mu*X;
- batch immigration-death: 0 -> b X at alpha, X -> 0 at mu*X;
- dimerisation: 2P -> P2 at k1*P*(P-1)/2, P2 -> 2P at k2*P2, P + 2 P2 = 100.

Method. For the first three every propensity is affine in the counts, so the equations of the
moments close at every order: for a monomial m of degree <= 4,
d E[m]/dt = E[sum_j a_j(x) (m(x + nu_j) - m(x))] is a combination of monomials of degree <= 4
(the moment equations of the chemical master equation; e.g. Gillespie 2009, IET Syst. Biol.
3:52 [M]). The linear system is built with sympy and solved exactly as M(t) = exp(A t) M(0) with
mpmath at 60 digits, so raw moments convert to cumulants without loss:
k4 = m4 - 4 m3 m1 - 3 m2^2 + 12 m2 m1^2 - 6 m1^4. Dimerisation has 51 states (P2 = 0..50): its
master equation p' = p Q is solved by the matrix exponential at 40 digits and the cumulants taken
from the distribution. For birth-death the closed form is checked too: one ancestor leaves a
zero-modified geometric law, P(0) = a, P(n) = (1 - a)(1 - b) b^(n-1), with
a = mu (E - 1)/(lam E - mu), b = lam (E - 1)/(lam E - mu), E = exp((lam - mu) t) (Kendall 1948,
Ann. Math. Stat. 19:1 [M]); X0 ancestors are independent, so every cumulant is X0 times one
ancestor's. The two methods must agree to 1e-30 relative.
"""
import csv
import os
import sys

import mpmath as mp
import sympy as sp

mp.mp.dps = 60
TIMES = list(range(51))


def linear_moments(species, x0, reactions):
    """Raw moments E[x_i^k], k <= 4, of every species at TIMES.

    reactions: list of (change dict, propensity as a sympy expression affine in the symbols).
    """
    xs = [sp.Symbol(s) for s in species]
    basis = [sp.Integer(1)]
    for d in range(1, 5):
        for powers in sp.utilities.iterables.multiset_combinations(
            [i for i in range(len(xs)) for _ in range(d)], d
        ):
            m = sp.Integer(1)
            for i in powers:
                m *= xs[i]
            basis.append(m)
    index = {sp.Poly(m, *xs).monoms()[0]: k for k, m in enumerate(basis)}
    n = len(basis)
    a = mp.zeros(n, n)
    for k, m in enumerate(basis):
        drift = sp.Integer(0)
        for change, prop in reactions:
            shifted = m.subs({xs[species.index(s)]: xs[species.index(s)] + c for s, c in change.items()},
                             simultaneous=True)
            drift += prop * (shifted - m)
        poly = sp.Poly(sp.expand(drift), *xs)
        for mono, coeff in poly.terms():
            c = sp.Rational(coeff)
            a[k, index[mono]] += mp.mpf(c.p) / c.q
    step = mp.expm(a)
    m0 = mp.matrix([float(b.subs(dict(zip(xs, x0)))) for b in basis])
    out = []
    m = m0
    for t in TIMES:
        if t > 0:
            m = step * m
        row = {}
        for i, s in enumerate(species):
            mono = [0] * len(xs)
            raws = []
            for k in range(1, 5):
                mono[i] = k
                raws.append(m[index[tuple(mono)]])
            row[s] = raws
        out.append(row)
    return out


def cumulants(raw):
    m1, m2, m3, m4 = raw
    var = m2 - m1**2
    k4 = m4 - 4 * m3 * m1 - 3 * m2**2 + 12 * m2 * m1**2 - 6 * m1**4
    return m1, var, k4


def birth_death_closed(x0, lam, mu, t):
    """Mean, variance, k4 of linear birth-death from x0 at t (zero-modified geometric)."""
    lam, mu = mp.mpf(lam), mp.mpf(mu)
    if t == 0:
        return mp.mpf(x0), mp.mpf(0), mp.mpf(0)
    e = mp.e ** ((lam - mu) * t)
    a = mu * (e - 1) / (lam * e - mu)
    b = lam * (e - 1) / (lam * e - mu)
    # raw moments of one ancestor: (1-a)(1-b) sum_n n^k b^(n-1) = (1-a)(1-b) Li_{-k}(b)/b
    raws = [(1 - a) * (1 - b) * mp.polylog(-k, b) / b for k in range(1, 5)]
    m1, var, k4 = cumulants(raws)
    return x0 * m1, x0 * var, x0 * k4


def dimerisation(k1, k2, total=100):
    """Distribution of P2 at TIMES from P2 = 0, P = total."""
    states = total // 2 + 1
    q = mp.zeros(states, states)
    for n in range(states):
        p = total - 2 * n
        fwd = mp.mpf(k1) * p * (p - 1) / 2
        back = mp.mpf(k2) * n
        if n + 1 < states:
            q[n, n + 1] += fwd
            q[n, n] -= fwd
        if n > 0:
            q[n, n - 1] += back
            q[n, n] -= back
    step = mp.expm(q)
    p = mp.matrix(1, states)
    p[0] = 1
    out = []
    for t in TIMES:
        if t > 0:
            p = p * step
        out.append([p[n] for n in range(states)])
    return out


def central(dist, f):
    mean = sum(pr * f(n) for n, pr in enumerate(dist))
    var = sum(pr * (f(n) - mean) ** 2 for n, pr in enumerate(dist))
    m4 = sum(pr * (f(n) - mean) ** 4 for n, pr in enumerate(dist))
    return mean, var, m4 - 3 * var**2


X, SINK = sp.symbols("X Sink")


def birth_death(x0, lam, mu, sink):
    species = ["X", "Sink"] if sink else ["X"]
    death = {"X": -1, "Sink": 1} if sink else {"X": -1}
    mom = linear_moments(species, [x0, 0][: len(species)],
                         [({"X": 1}, sp.Rational(lam) * X), (death, sp.Rational(mu) * X)])
    for t, row in zip(TIMES, mom):
        closed = birth_death_closed(x0, sp.Rational(lam), sp.Rational(mu), t)
        for got, want in zip(cumulants(row["X"]), closed):
            assert abs(got - want) <= mp.mpf("1e-30") * max(1, abs(want)), (t, got, want)
    return {s: [cumulants(row[s]) for row in mom] for s in species}


def immigration_death(alpha, mu, batch=1, sink=False):
    species = ["X", "Sink"] if sink else ["X"]
    death = {"X": -1, "Sink": 1} if sink else {"X": -1}
    mom = linear_moments(species, [0] * len(species),
                         [({"X": batch}, sp.Rational(alpha)), (death, sp.Rational(mu) * X)])
    return {s: [cumulants(row[s]) for row in mom] for s in species}


def constant(value):
    return [(mp.mpf(value), mp.mpf(0), mp.mpf(0)) for _ in TIMES]


def dimer(species):
    dist = dimerisation(sp.Rational("0.001"), sp.Rational("0.01"))
    out = {"P2": [central(d, lambda n: n) for d in dist]}
    if "P" in species:
        out["P"] = [central(d, lambda n: 100 - 2 * n) for d in dist]
    return out


def models():
    bd = lambda: birth_death(100, "0.1", "0.11", sink=False)  # noqa: E731
    out = {}
    for case in ["00001", "00002", "00008", "00009", "00010", "00012", "00013",
                 "00014", "00015", "00016", "00017"]:
        out[case] = bd
    # compartment of size 2, X read as a concentration in the laws Lambda*X and Mu*X
    out["00011"] = lambda: birth_death(100, "0.05", "0.055", sink=False)
    out["00004"] = lambda: birth_death(10, "0.1", "0.11", sink=False)
    out["00006"] = lambda: {**birth_death(100, "0.1", "0.11", sink=False), "Sink": constant(0)}
    out["00007"] = lambda: birth_death(100, "0.1", "0.11", sink=True)
    out["00020"] = lambda: immigration_death(1, "0.1")
    out["00021"] = lambda: immigration_death(10, "0.1")
    out["00022"] = lambda: immigration_death(5, "0.1")
    out["00027"] = lambda: immigration_death(1, "0.1")
    for case in ["00024", "00026"]:
        out[case] = lambda: {**immigration_death(10, "0.1"), "Source": constant(0), "Sink": constant(0)}
    out["00025"] = lambda: {**immigration_death(10, "0.1", sink=True), "Source": constant(0)}
    out["00030"] = lambda: dimer(["P", "P2"])
    for case in ["00034", "00035", "00036"]:
        out[case] = lambda: dimer(["P2"])
    out["00037"] = lambda: immigration_death(1, "0.2", batch=5)
    out["00038"] = lambda: immigration_death(1, "0.4", batch=10)
    return out


def suite_results(root, case):
    path = os.path.join(root, case, f"{case}-results.csv")
    with open(path) as f:
        rows = list(csv.DictReader(f))
    return rows


def main():
    root = sys.argv[1] if len(sys.argv) > 1 else None
    w = csv.writer(sys.stdout, lineterminator="\n")
    w.writerow(["case", "species", "time", "mean", "sd", "kappa4"])
    for case, make in sorted(models().items()):
        result = make()
        expected = suite_results(root, case) if root else None
        for s, rows in result.items():
            for t, (mean, var, k4) in zip(TIMES, rows):
                sd = mp.sqrt(var) if var > 0 else mp.mpf(0)
                if expected is not None:
                    e = expected[t]
                    assert float(e["time"]) == t
                    for name, got in [("mean", mean), ("sd", sd)]:
                        want = float(e[f"{s}-{name}"])
                        assert abs(float(got) - want) <= 1e-5 * abs(want) + 1e-6, (case, s, t, name, got, want)
                w.writerow([case, s, t, mp.nstr(mean, 15), mp.nstr(sd, 15), mp.nstr(k4, 15)])


if __name__ == "__main__":
    main()
