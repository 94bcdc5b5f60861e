"""Golden values for the special functions, modulation, fading and coverage
checks of tests/tests/signal.rs, computed with SciPy (the oracle).

Regenerate (from the repository root):

    python3 tests/golden/gen_special.py

Writes tests/golden/special.csv, ber.csv, fading.csv and coverage.csv.
Needs numpy and scipy (written against scipy 1.17).
"""

import csv
import math
import os

import numpy as np
from scipy import integrate, special, stats

HERE = os.path.dirname(os.path.abspath(__file__))


def write(name, header, rows):
    with open(os.path.join(HERE, name), "w", newline="") as f:
        w = csv.writer(f, lineterminator="\n")
        w.writerow(header)
        for r in rows:
            w.writerow([repr(float(v)) if isinstance(v, (float, np.floating)) else v for v in r])


def special_rows():
    rows = []
    for x in np.round(np.arange(-4.0, 9.0001, 0.25), 6):
        rows.append(("erfc", x, 0.0, special.erfc(x)))
    for x in list(np.round(np.arange(-3.0, 12.0001, 0.5), 6)) + [15.0, 20.0, 30.0, 40.0]:
        rows.append(("erfcx", x, 0.0, special.erfcx(x)))
    for x in np.round(np.arange(-6.0, 13.0001, 0.25), 6):
        rows.append(("q", x, 0.0, stats.norm.sf(x)))
    ps = [10.0 ** -e for e in range(30, 0, -1)] + [0.02, 0.05, 0.1, 0.2, 0.3, 0.4, 0.5, 0.6, 0.7,
                                                 0.8, 0.9, 0.95, 0.99, 0.999, 0.9999, 0.99999,
                                                 0.999999]
    for p in ps:
        rows.append(("inverse_q", p, 0.0, stats.norm.isf(p)))
    for x in [0.0, 0.1, 0.5, 1.0, 2.0, 3.0, 3.75, 3.76, 5.0, 8.0, 12.0, 20.0, 30.0, 50.0]:
        rows.append(("i0", x, 0.0, special.i0(x)))
    for x in [0.0, 1.0, 3.75, 4.0, 10.0, 50.0, 100.0, 1000.0, 10000.0]:
        rows.append(("i0e", x, 0.0, special.i0e(x)))
    # Marcum Q1(a, b) = ncx2.sf(b^2, 2, a^2); its complement is ncx2.cdf.
    for a in [0.1, 0.5, 1.0, 2.0, 3.0, 4.4721, 6.0, 8.0, 10.0, 12.0, 14.1421]:
        for b in [0.01, 0.1, 0.5, 1.0, 2.0, 3.0, 4.0, 5.0, 6.0, 8.0, 10.0, 12.0, 14.0, 16.0, 20.0]:
            rows.append(("marcum_q1", a, b, stats.ncx2.sf(b * b, 2, a * a)))
            rows.append(("marcum_q1_complement", a, b, stats.ncx2.cdf(b * b, 2, a * a)))
    return rows


def ber_rows():
    q = stats.norm.sf
    rows = []
    for db in np.round(np.arange(-2.0, 30.0001, 1.0), 6):
        g = 10.0 ** (db / 10.0)
        rows.append(("bpsk", 2, db, q(math.sqrt(2 * g))))
        rows.append(("dbpsk", 2, db, 0.5 * math.exp(-g)))
        rows.append(("fsk_coherent", 2, db, q(math.sqrt(g))))
        rows.append(("fsk_noncoherent", 2, db, 0.5 * math.exp(-g / 2)))
        for m in [8, 16, 32]:
            k = math.log2(m)
            rows.append(("psk", m, db, 2 / k * q(math.sqrt(2 * k * g) * math.sin(math.pi / m))))
        for m in [16, 64, 256]:
            k = math.log2(m)
            rows.append(("qam", m, db,
                         4 / k * (1 - 1 / math.sqrt(m)) * q(math.sqrt(3 * k * g / (m - 1)))))
    return [r for r in rows if r[3] > 1e-30]


def composite_outage(margin_db, sigma):
    f = lambda z: stats.norm.pdf(z) * -math.expm1(-(10.0 ** (-(margin_db + sigma * z) / 10.0)))
    val, _ = integrate.quad(f, -12.0, 12.0, points=[-margin_db / sigma], epsabs=0.0,
                            epsrel=1e-11, limit=400)
    return val


def fading_rows():
    rows = []
    margins = [-5.0, 0.0, 3.0, 6.0, 10.0, 15.0, 20.0, 30.0, 40.0]
    for m in margins:
        rows.append(("rayleigh", 0.0, m, -math.expm1(-(10.0 ** (-m / 10.0)))))
    for k_db in [0.0, 3.0, 6.0, 10.0, 13.0, 16.0, 20.0]:
        k = 10.0 ** (k_db / 10.0)
        for m in margins:
            b = math.sqrt(2 * (k + 1) / 10.0 ** (m / 10.0))
            # Envelope with LOS amplitude sqrt(2K), unit variance per quadrature.
            rows.append(("rician", k_db, m, stats.rice.cdf(b, math.sqrt(2 * k))))
    for s in [2.0, 4.0, 6.0, 8.0, 10.0, 12.0]:
        for m in margins:
            rows.append(("lognormal", s, m, stats.norm.sf(m / s)))
            rows.append(("composite", s, m, composite_outage(m, s)))
    return [r for r in rows if r[3] > 1e-30]


def coverage_rows():
    rows = []
    for sigma, n in [(4.0, 4.0), (8.0, 4.0), (8.0, 2.0), (6.0, 3.5), (12.0, 3.0), (10.0, 2.0),
                     (16.0, 2.0)]:
        b = 10.0 * n * math.log10(math.e) / (sigma * math.sqrt(2))
        for edge in [0.05, 0.2, 0.5, 0.75, 0.9, 0.95, 0.99]:
            a = stats.norm.isf(edge) / math.sqrt(2)
            y = (1 - a * b) / b
            area = edge + 0.5 * math.exp(-a * a) * special.erfcx(y)
            rows.append((sigma, n, edge, area))
    return rows


def main():
    write("special.csv", ["function", "x", "y", "value"], special_rows())
    write("ber.csv", ["scheme", "order", "ebn0_db", "ber"], ber_rows())
    write("fading.csv", ["model", "param_db", "margin_db", "outage"], fading_rows())
    write("coverage.csv", ["sigma_db", "path_loss_exponent", "edge_probability", "area"],
          coverage_rows())


if __name__ == "__main__":
    main()
