#!/usr/bin/env python3
"""Writes the invented static log of the Tarn-7 rate gyro (an invented
two-axis MEMS gyro of the invented skerry sled) for `cairn allan`.

The sensor sat still for four hours, sampled at 5 Hz. Each axis reads a
constant turn-on bias plus the IEEE Std 952-1997 noise terms, with the
coefficients below (the values `cairn allan` should find again):

- white rate noise N (angle random walk): per-sample deviation N / sqrt(Ts);
- bias instability B: flicker noise of two-sided PSD B^2 / (2 pi f),
  approximated by a sum of first-order Gauss-Markov processes with
  correlation times 0.5 s to 20000 s, four per decade, each of variance
  (B^2 / pi) * ln(10) / 4 (the sum's PSD is then about B^2 / (2 pi f)
  between the extreme corner frequencies);
- rate random walk K: a random walk of the bias, K sqrt(Ts) per sample.

Pure Python 3 standard library; the same seed gives the same file.

    python3 scripts/make-allan-log.py [--seed N] [--out PATH]
"""

import argparse
import math
import os
import random

RATE_HZ = 5.0
HOURS = 4.0
# Invented noise figures, per axis, in deg/s units:
# (name, turn-on bias deg/s, N (deg/s)*sqrt(s), B deg/s, K (deg/s)/sqrt(s))
AXES = [
    ("gx", 0.021, 2.5e-3, 3.0e-4, 1.0e-5),
    ("gy", -0.013, 3.5e-3, 4.0e-4, 1.5e-5),
]
TC_MIN, TC_MAX, PER_DECADE = 0.5, 2.0e4, 4


def main():
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--seed", type=int, default=952)
    here = os.path.dirname(os.path.abspath(__file__))
    ap.add_argument(
        "--out",
        default=os.path.join(here, "..", "host-check", "tests", "data", "tarn7-static.csv"),
    )
    args = ap.parse_args()
    rng = random.Random(args.seed)
    ts = 1.0 / RATE_HZ
    n = int(HOURS * 3600 * RATE_HZ)
    decades = math.log10(TC_MAX / TC_MIN)
    tcs = [TC_MIN * 10 ** (i / PER_DECADE) for i in range(int(decades * PER_DECADE) + 1)]
    dln = math.log(10) / PER_DECADE
    state = []
    for _, _, _, b, _ in AXES:
        var = b * b / math.pi * dln
        gms = []
        for tc in tcs:
            phi = math.exp(-ts / tc)
            gms.append([phi, math.sqrt(var * (1 - phi * phi)), rng.gauss(0, math.sqrt(var))])
        state.append({"gm": gms, "walk": 0.0})
    with open(args.out, "w", newline="\n") as f:
        f.write("# INVENTED DATA: Tarn-7 rate gyro (invented sensor), static, 5 Hz, 4 h.\n")
        f.write("# Written by scripts/make-allan-log.py --seed %d.\n" % args.seed)
        for name, bias, nn, b, k in AXES:
            f.write("# %s: N = %g (deg/s)*sqrt(s), B = %g deg/s (flicker %g..%g s), K = %g (deg/s)/sqrt(s)\n"
                    % (name, nn, b, TC_MIN, TC_MAX, k))
        f.write("time[s]," + ",".join("%s[deg/s]" % a[0] for a in AXES) + "\n")
        for i in range(n):
            row = ["%.1f" % (i * ts)]
            for (name, bias, nn, b, k), st in zip(AXES, state):
                flicker = 0.0
                for g in st["gm"]:
                    g[2] = g[0] * g[2] + g[1] * rng.gauss(0, 1)
                    flicker += g[2]
                value = bias + st["walk"] + flicker + nn / math.sqrt(ts) * rng.gauss(0, 1)
                st["walk"] += k * math.sqrt(ts) * rng.gauss(0, 1)
                row.append("%.5e" % value)
            f.write(",".join(row) + "\n")


if __name__ == "__main__":
    main()
