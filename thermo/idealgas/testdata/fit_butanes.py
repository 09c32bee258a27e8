#!/usr/bin/env python3
"""NASA 7-coefficient polynomials for n-butane and isobutane, fitted to the
GERG-2008 ideal-gas isobaric heat capacity (Kunz and Wagner, J. Chem. Eng.
Data 57 (2012) 3032, as stored in testdata/reference/eos/gerg2008.json).

GRI-Mech 3.0 has no butanes. cp/R is fitted by least squares at 1 K steps on
200-450 K and 450-1000 K, each interval constrained to equal the GERG value
at T_mid = 450 K (so cp is continuous there). The integration constants use
the standard enthalpy of formation and the standard entropy at 298.15 K,
1 bar, FROM MEMORY (not checked against a table):
  n-C4H10: dHf = -125.79 kJ/mol, S = 310.23 J/(mol K)
  i-C4H10: dHf = -134.2  kJ/mol, S = 294.64 J/(mol K)
They matter only for reaction balances (heats of combustion), never for h and
s differences of a mixture of fixed composition. The high-interval constants
make h and s continuous at T_mid. Run: python3 fit_butanes.py (standard
library only); the printed rows are pasted into species.go.
"""
import json, math, os
from math import comb

HERE = os.path.dirname(os.path.abspath(__file__))
d = json.load(open(os.path.join(HERE, '../../../testdata/reference/eos/gerg2008.json')))
G = {c['formula']: c['ideal_gas']['nist_working_form'] for c in d['components']}
RSTAR = d['ideal_gas_R_star_J_per_mol_K']
R = 8.314462618  # CODATA 2018, as in species.go
TMID, TLO, THI = 450.0, 200.0, 1000.0
FORMATION = {'n-C4H10': (-125.79e3, 310.23), 'i-C4H10': (-134.2e3, 294.64)}


def gcpR(f, T):
    w = G[f]
    c = w['n3_cp0_over_Rstar']
    for n, th, kind in zip([w['n4'], w['n5'], w['n6'], w['n7']], w['theta0_K'], 'scsc'):
        if th == 0:
            continue
        x = th / T
        c += n * x * x / (math.sinh(x) ** 2 if kind == 's' else math.cosh(x) ** 2)
    return c * RSTAR / R


def solve(M, b):
    n = len(b)
    M = [r[:] for r in M]
    b = b[:]
    for i in range(n):
        piv = max(range(i, n), key=lambda r: abs(M[r][i]))
        M[i], M[piv] = M[piv], M[i]
        b[i], b[piv] = b[piv], b[i]
        for r in range(i + 1, n):
            f = M[r][i] / M[i][i]
            for c in range(i, n):
                M[r][c] -= f * M[i][c]
            b[r] -= f * b[i]
    x = [0.0] * n
    for i in reversed(range(n)):
        x[i] = (b[i] - sum(M[i][c] * x[c] for c in range(i + 1, n))) / M[i][i]
    return x


def cfit(f, lo, hi):
    g = gcpR(f, TMID)
    M = [[0.0] * 4 for _ in range(4)]
    b = [0.0] * 4
    T = lo
    while T <= hi + 1e-9:
        u = (T - TMID) / 1000
        p = [u ** k for k in range(1, 5)]
        y = gcpR(f, T) - g
        for i in range(4):
            b[i] += p[i] * y
            for j in range(4):
                M[i][j] += p[i] * p[j]
        T += 1
    c = [g] + solve(M, b)
    a = [0.0] * 5
    for k in range(5):
        for j in range(k + 1):
            a[j] += c[k] * comb(k, j) * (-TMID) ** (k - j) / 1000 ** k
    return [float('%.9e' % v) for v in a]


def hpoly(a, T):  # h/R without a6
    return T * (a[0] + T * (a[1] / 2 + T * (a[2] / 3 + T * (a[3] / 4 + T * a[4] / 5))))


def spoly(a, T):  # s/R without a7
    return a[0] * math.log(T) + T * (a[1] + T * (a[2] / 2 + T * (a[3] / 3 + T * a[4] / 4)))


for f, (dhf, s0) in FORMATION.items():
    lo, hi = cfit(f, TLO, TMID), cfit(f, TMID, THI)
    T = 298.15
    lo += [dhf / R - hpoly(lo, T), s0 / R - spoly(lo, T)]
    lo = lo[:5] + [float('%.9e' % v) for v in lo[5:]]
    hi += [hpoly(lo, TMID) + lo[5] - hpoly(hi, TMID), spoly(lo, TMID) + lo[6] - spoly(hi, TMID)]
    hi = hi[:5] + [float('%.9e' % v) for v in hi[5:]]
    err = max(abs(sum((lo if t < TMID else hi)[k] * t ** k for k in range(5)) / gcpR(f, t) - 1) for t in range(200, 1001))
    print('%s max |cp/cp_GERG - 1| on 200-1000 K = %.4f %%' % (f, 100 * err))
    print('  Low: ', ', '.join('%.9e' % v for v in lo))
    print('  High:', ', '.join('%.9e' % v for v in hi))
