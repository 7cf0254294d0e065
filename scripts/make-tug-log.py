#!/usr/bin/env python3
"""Writes the invented Bramble tug log (docs/log-format.md) used by the checks.

The true motion is simulated here, independently of the Rust models: a tug
driving warehouse aisles (accelerate, cruise, slow down, turn through 90
degrees, sometimes stop to couple carts), integrated in sub-steps of at most
1 ms. The inertial sensors report each input interval's average plus white
noise of variance N^2 / dt (IEEE Std 952-1997 noise terms); the gyro carries
a bias that warms up and random-walks. The 100 Hz input clock jitters by up
to 1 ms, the input stops once for 2 s, and the radio drops out for 60 s.

Pure Python 3 standard library; the same seed gives the same file.

    python3 scripts/make-tug-log.py [--seed N] [--out PATH]
"""

import argparse
import math
import os
import random

# Noise figures of the invented tug's sensors (the values a user passes to
# `TugMotion::new`, `WheelSpeed::new`, `RadioFix::new`, `HeadingFix::new`).
GYRO_ARW = 2.9e-4  # rad/sqrt(s)   (1 deg/sqrt(h))
ACCEL_VRW = 4.0e-3  # (m/s)/sqrt(s)
GYRO_BIAS_RW = 2.0e-5  # (rad/s)/sqrt(s)
WHEEL_SIGMA = 0.03  # m/s
RADIO_SIGMA = 0.10  # m
HEADING_SIGMA = 0.02  # rad

DURATION_S = 600.0
TICK = 1e-4  # times are whole multiples of 0.1 ms, printed exactly
INPUT_GAP = 2.0  # s without input, during a straight cruise
RADIO_DROPOUT = (330.0, 390.0)  # s, no radio rows in [start, end)
WAREHOUSE = (0.0, 120.0, 0.0, 60.0)  # x min, x max, y min, y max (m)
START = (6.0, 4.0, math.pi / 2.0, 0.0)  # x, y, heading, speed

DEFAULT_OUT = os.path.join(
    os.path.dirname(os.path.abspath(__file__)),
    "..",
    "examples",
    "bramble-tug",
    "data",
    "bramble-shift.csv",
)


def wrap(a):
    """Wraps an angle to (-pi, pi]."""
    a = math.fmod(a, 2.0 * math.pi)
    if a > math.pi:
        a -= 2.0 * math.pi
    elif a <= -math.pi:
        a += 2.0 * math.pi
    return a


def plan_route(rng, start):
    """Segments (duration s, acceleration m/s^2, yaw rate rad/s, kind)
    covering the shift. Turns pick the side that faces the warehouse's
    centre, so the tug stays inside."""
    x, y, th, v = start
    segments = []
    t = 0.0

    def add(duration, accel, rate, kind):
        nonlocal x, y, th, v, t
        # Coarse dead reckoning, only to choose turn directions.
        n = max(1, int(duration / 0.05))
        h = duration / n
        for _ in range(n):
            x += v * math.cos(th) * h
            y += v * math.sin(th) * h
            th += rate * h
            v += accel * h
        segments.append((duration, accel, rate, kind))
        t += duration

    while t < DURATION_S + 10.0:
        cruise = rng.uniform(1.0, 1.8)
        add((cruise - v) / 0.5, 0.5, 0.0, "accelerate")
        add(rng.uniform(4.0, 20.0), 0.0, 0.0, "cruise")
        turn_speed = 0.6
        add((v - turn_speed) / 0.4, -0.4, 0.0, "slow")
        cx = 0.5 * (WAREHOUSE[0] + WAREHOUSE[1]) - x
        cy = 0.5 * (WAREHOUSE[2] + WAREHOUSE[3]) - y
        left = -math.sin(th) * cx + math.cos(th) * cy
        side = 1.0 if left > 0.0 else -1.0
        if abs(left) < 5.0:
            side = rng.choice((-1.0, 1.0))
        rate = 0.35 * side
        add((math.pi / 2.0) / 0.35, 0.0, rate, "turn")
        if rng.random() < 0.25:
            add(turn_speed / 0.4, -0.4, 0.0, "stop")
            add(rng.uniform(4.0, 12.0), 0.0, 0.0, "dwell")
    return segments


class Route:
    """The planned controls as a function of time."""

    def __init__(self, segments):
        self.ends = []
        self.segments = segments
        t = 0.0
        for s in segments:
            t += s[0]
            self.ends.append(t)
        self.i = 0

    def at(self, t):
        """(acceleration, yaw rate, kind) at time t (t must not decrease)."""
        while self.i < len(self.ends) - 1 and t >= self.ends[self.i]:
            self.i += 1
        _, accel, rate, kind = self.segments[self.i]
        return accel, rate, kind

    def find_cruise(self, after, length):
        """Start time of the first cruise at or after `after` lasting at
        least `length` s, with 1 s to spare on each side."""
        t = 0.0
        for s in self.segments:
            if s[3] == "cruise" and t >= after and s[0] >= length + 2.0:
                return t + 1.0
            t += s[0]
        raise SystemExit("no cruise long enough for the input gap")


def simulate(seed):
    rng = random.Random(seed)
    route = Route(plan_route(rng, START))
    gap_start = route.find_cruise(200.0, INPUT_GAP)
    x, y, th, v = START
    # Gyro bias: a warm-up of 4e-4 rad/s with a 150 s time constant on top
    # of a random walk (the walk is what the model knows).
    bias0 = 1.5e-3
    walk = 0.0

    def bias(t):
        return bias0 + 4e-4 * (1.0 - math.exp(-t / 150.0)) + walk

    rows = []
    n = 0  # time in ticks
    k = 0  # input row count
    last_radio = -1
    last_heading = -1
    last_truth = -1
    gapped = False
    wraps = 0
    while n * TICK <= DURATION_S:
        t = n * TICK
        if k == 0:
            dn = 0
        elif not gapped and t >= gap_start:
            dn = int(round(INPUT_GAP / TICK))
            gapped = True
        else:
            dn = 100 + rng.randint(-10, 10)
        if dn:
            dt = dn * TICK
            subs = max(10, int(math.ceil(dt / 1e-3)))
            h = dt / subs
            rate_sum = 0.0
            accel_sum = 0.0
            b = bias(t)
            for j in range(subs):
                accel, rate, _ = route.at(t + (j + 0.5) * h)
                # Midpoint integration of the unicycle over the sub-step.
                v_mid = v + 0.5 * accel * h
                th_mid = th + 0.5 * rate * h
                x += v_mid * math.cos(th_mid) * h
                y += v_mid * math.sin(th_mid) * h
                before = th
                th = wrap(th + rate * h)
                if abs(th - before) > math.pi:
                    wraps += 1
                v += accel * h
                rate_sum += rate * h
                accel_sum += accel * h
            gyro = rate_sum / dt + b + GYRO_ARW / math.sqrt(dt) * rng.gauss(0.0, 1.0)
            acc = accel_sum / dt + ACCEL_VRW / math.sqrt(dt) * rng.gauss(0.0, 1.0)
            walk += GYRO_BIAS_RW * math.sqrt(dt) * rng.gauss(0.0, 1.0)
            n += dn
            t = n * TICK
        else:
            gyro = bias(t) + GYRO_ARW / math.sqrt(0.01) * rng.gauss(0.0, 1.0)
            acc = ACCEL_VRW / math.sqrt(0.01) * rng.gauss(0.0, 1.0)
        if t > DURATION_S:
            break
        ts = "%.4f" % t
        rows.append("%s,input,%.5f,%.3f" % (ts, gyro, acc))
        if k % 10 == 5:
            rows.append("%s,wheel,%.4f" % (ts, v + WHEEL_SIGMA * rng.gauss(0.0, 1.0)))
        second = int(t)
        if second != last_radio and k > 0:
            last_radio = second
            if not (RADIO_DROPOUT[0] <= t < RADIO_DROPOUT[1]):
                zx = x + RADIO_SIGMA * rng.gauss(0.0, 1.0)
                zy = y + RADIO_SIGMA * rng.gauss(0.0, 1.0)
                rows.append("%s,radio,%.3f,%.3f" % (ts, zx, zy))
        if int(t / 5.0) != last_heading and k > 0:
            last_heading = int(t / 5.0)
            z = wrap(th + HEADING_SIGMA * rng.gauss(0.0, 1.0))
            rows.append("%s,heading,%.5f" % (ts, z))
        if second != last_truth:
            last_truth = second
            rows.append(
                "%s,truth,%.4f,%.4f,%.6f,%.4f,%.7f" % (ts, x, y, th, v, bias(t))
            )
        k += 1
    return rows, gap_start, k, wraps


def main():
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--seed", type=int, default=20261202)
    ap.add_argument("--out", default=DEFAULT_OUT)
    args = ap.parse_args()
    rows, gap_start, inputs, wraps = simulate(args.seed)
    header = [
        "# INVENTED DATA: a simulated ten-minute shift of the invented Bramble",
        "# warehouse tug (crate bramble-tug). No real robot, sensor or site.",
        "# Written by scripts/make-tug-log.py --seed %d; format: docs/log-format.md." % args.seed,
        "#",
        "# input:   gyro yaw rate (rad/s, includes the bias), forward accel (m/s^2);",
        "#          each row is the average over the interval since the previous",
        "#          input row (about 10 ms +- 1 ms; one 2 s gap from %.4f s)." % gap_start,
        "# wheel:   forward speed, m/s (about 10 Hz).",
        "# radio:   position x, y, m (1 Hz; none in [%.0f, %.0f) s)." % RADIO_DROPOUT,
        "# heading: heading, rad, in (-pi, pi] (every 5 s, ceiling markers).",
        "# truth:   x (m), y (m), heading (rad), speed (m/s), gyro bias (rad/s), 1 Hz.",
        "# No measurement rows fall inside the input gap: the whole logger stalled.",
        "#",
        "# Noise figures of the invented sensors (as the models take them):",
        "#   TugMotion::new(gyro_arw = %g rad/sqrt(s), accel_vrw = %g (m/s)/sqrt(s),"
        % (GYRO_ARW, ACCEL_VRW),
        "#                  gyro_bias_rw = %g (rad/s)/sqrt(s))" % GYRO_BIAS_RW,
        "#   WheelSpeed::new(%g m/s), RadioFix::new(%g m), HeadingFix::new(%g rad)"
        % (WHEEL_SIGMA, RADIO_SIGMA, HEADING_SIGMA),
        "# The gyro bias also warms up by 4e-4 rad/s (time constant 150 s) on top of",
        "# its random walk; the accelerometer has no bias. Values are rounded for",
        "# printing (far below the noise).",
        "# Suggested start: x0 = (%g, %g, %.6f, 0, 0)," % (START[0], START[1], START[2]),
        "#   P0 = diag(0.01, 0.01, 1e-4, 1e-4, 1e-5).",
        "time_s,stream,values",
    ]
    out = os.path.normpath(args.out)
    os.makedirs(os.path.dirname(out), exist_ok=True)
    with open(out, "w", newline="\n") as f:
        f.write("\n".join(header + rows) + "\n")
    size = os.path.getsize(out)
    print(
        "wrote %s: %d rows (%d input), %.2f MB, heading wrapped %d times"
        % (out, len(rows), inputs, size / 1e6, wraps)
    )


if __name__ == "__main__":
    main()
