#!/usr/bin/python3
"""Writes the scipy golden files that internal/condition and
internal/kinematics are tested against.

Run with Debian's python3-scipy from the repository root:

    /usr/bin/python3 testdata/golden/scipy/gen.py

The output is deterministic (fixed seeds). CI runs no Python: the JSON files
written next to this script are committed.

Files:
  butter.json       scipy.signal.butter(N, fc, fs=fs, output='sos') and
                    scipy.signal.sosfilt_zi for orders 1..6.
  sosfiltfilt.json  scipy.signal.sosfiltfilt with the default edge handling
                    (odd extension, default padlen) and, for signals not longer
                    than the default padlen, padlen = len(x) - 1.
  rotvec.json       central differences of a smooth random rotation sequence
                    with scipy.spatial.transform.Rotation:
                      world[i] = (R[i+1] * R[i-1].inv()).as_rotvec() * fs / 2
                      body[i]  = (R[i-1].inv() * R[i+1]).as_rotvec() * fs / 2
                    and one-sided differences (times fs) at the two ends.
  residual.json     Winter's residual analysis (Biomechanics and Motor Control
                    of Human Movement, 4th ed., sec. 3.4.4.3) computed here with
                    scipy filters and numpy.polyfit, following the procedure
                    documented in internal/condition/residual.go.
"""

import json
import os
import sys

import numpy as np
import scipy
from scipy import signal
from scipy.spatial.transform import Rotation

HERE = os.path.dirname(os.path.abspath(__file__))


def write(name, obj):
    obj = dict(obj)
    obj["generator"] = "testdata/golden/scipy/gen.py, scipy %s, numpy %s" % (
        scipy.__version__, np.__version__)
    with open(os.path.join(HERE, name), "w") as f:
        json.dump(obj, f, indent=None, separators=(",", ":"))
        f.write("\n")


def default_padlen(sos):
    ntaps = 2 * len(sos) + 1
    ntaps -= min((sos[:, 2] == 0).sum(), (sos[:, 5] == 0).sum())
    return 3 * ntaps


def filtfilt(sos, x):
    """sosfiltfilt with kinchain's short-signal rule."""
    pad = default_padlen(sos)
    if len(x) <= pad:
        return signal.sosfiltfilt(sos, x, padlen=len(x) - 1), len(x) - 1
    return signal.sosfiltfilt(sos, x), None


# (order, cutoff Hz, sampling rate Hz). Includes cutoffs above fs/4, where
# the odd-order real pole is negative and the pole-zero pairing changes.
FILTERS = [
    (1, 10.0, 100.0),
    (1, 0.5, 1000.0),
    (1, 180.0, 400.0),
    (2, 20.0, 1000.0),
    (2, 45.0, 100.0),
    (2, 6.0, 120.0),
    (3, 6.0, 120.0),
    (3, 200.0, 500.0),
    (3, 20.0, 240.0),
    (4, 50.0, 240.0),
    (4, 1.0, 1000.0),
    (4, 20.0, 500.0),
    (5, 100.0, 500.0),
    (5, 12.0, 1000.0),
    (6, 15.0, 1000.0),
    (6, 220.0, 500.0),
    (6, 30.0, 120.0),
]


def gen_butter():
    cases = []
    for order, fc, fs in FILTERS:
        sos = signal.butter(order, fc, fs=fs, output="sos")
        zi = signal.sosfilt_zi(sos)
        cases.append({"order": order, "cutoff_hz": fc, "fs_hz": fs,
                      "sos": sos.tolist(), "zi": zi.tolist(),
                      "default_padlen": int(default_padlen(sos))})
    write("butter.json", {"cases": cases})


def test_signal(rng, n, fs):
    t = np.arange(n) / fs
    x = (np.sin(2 * np.pi * 3.0 * t) + 0.5 * np.cos(2 * np.pi * 0.25 * fs * t / 2)
         + 0.3 * rng.standard_normal(n) + np.cumsum(rng.standard_normal(n)) * 0.05 + 2.0)
    return x


def gen_sosfiltfilt():
    rng = np.random.default_rng(20240611)
    cases = []
    lengths = [1, 2, 3, 5, 7, 12, 13, 20, 40, 200]
    for k, (order, fc, fs) in enumerate(FILTERS):
        sos = signal.butter(order, fc, fs=fs, output="sos")
        # Every filter on a long signal, and a rotating choice of short ones.
        for n in [400, lengths[k % 10], lengths[(k + 5) % 10]]:
            x = test_signal(rng, n, fs)
            y, padlen = filtfilt(sos, x)
            cases.append({"order": order, "cutoff_hz": fc, "fs_hz": fs,
                          "padlen": padlen, "x": x.tolist(), "y": y.tolist()})
    write("sosfiltfilt.json", {"cases": cases})


def gen_rotvec():
    rng = np.random.default_rng(7)
    fs = 200.0
    n = 400
    t = np.arange(n) / fs
    rv = np.zeros((n, 3))
    for _ in range(4):
        amp = rng.normal(size=3) * 1.2
        f = rng.uniform(0.3, 4.0)
        ph = rng.uniform(0, 2 * np.pi)
        rv += np.outer(np.sin(2 * np.pi * f * t + ph), amp)
    r0 = Rotation.random(random_state=11)
    rots = r0 * Rotation.from_rotvec(rv)
    # A fast spin about a moving axis on top, so that the angle between i-1
    # and i+1 reaches ~1 rad.
    spin = Rotation.from_rotvec(np.outer(45.0 * t + 30.0 * t ** 2, [0.3, -0.5, 0.81]))
    rots = rots * spin
    world = np.zeros((n, 3))
    body = np.zeros((n, 3))
    for i in range(1, n - 1):
        world[i] = (rots[i + 1] * rots[i - 1].inv()).as_rotvec() * fs / 2
        body[i] = (rots[i - 1].inv() * rots[i + 1]).as_rotvec() * fs / 2
    world[0] = (rots[1] * rots[0].inv()).as_rotvec() * fs
    body[0] = (rots[0].inv() * rots[1]).as_rotvec() * fs
    world[n - 1] = (rots[n - 1] * rots[n - 2].inv()).as_rotvec() * fs
    body[n - 1] = (rots[n - 2].inv() * rots[n - 1]).as_rotvec() * fs
    xyzw = rots.as_quat()
    wxyz = np.column_stack([xyzw[:, 3], xyzw[:, 0], xyzw[:, 1], xyzw[:, 2]])
    write("rotvec.json", {"fs_hz": fs, "q_wxyz": wxyz.tolist(),
                          "omega_world": world.tolist(), "omega_body": body.tolist()})


def residual(x, fc, fs, order):
    sos = signal.butter(order, fc, fs=fs, output="sos")
    y, _ = filtfilt(sos, x)
    return float(np.sqrt(np.mean((x - y) ** 2)))


def residual_cutoff(x, fs, order):
    fn = fs / 2
    fit_f = np.array([fn * (0.3 + 0.5 * k / 20) for k in range(21)])
    fit_r = np.array([residual(x, f, fs, order) for f in fit_f])
    slope, intercept = np.polyfit(fit_f, fit_r, 1)
    h = min(0.5, fn / 200)
    prev_f, prev_r = None, None
    j = 1
    while j * h < 0.3 * fn:
        f = j * h
        r = residual(x, f, fs, order)
        if r <= intercept:
            if prev_f is None:
                return f, intercept
            return prev_f + (prev_r - intercept) / (prev_r - r) * h, intercept
        prev_f, prev_r = f, r
        j += 1
    return 0.3 * fn, intercept


def gen_residual():
    rng = np.random.default_rng(99)
    cases = []
    for fs, n, sigma, order in [(500.0, 1000, 0.05, 2), (1000.0, 2000, 0.1, 2),
                                (120.0, 360, 0.05, 2), (240.0, 600, 0.2, 4)]:
        t = np.arange(n) / fs
        x = (np.sin(2 * np.pi * 2.0 * t) + 0.6 * np.sin(2 * np.pi * 5.0 * t + 1.0)
             + 0.4 * np.sin(2 * np.pi * 8.0 * t + 2.0) + sigma * rng.standard_normal(n))
        fc, a = residual_cutoff(x, fs, order)
        cases.append({"fs_hz": fs, "order": order, "noise_sd": sigma, "x": x.tolist(),
                      "cutoff_hz": fc, "intercept": float(a)})
    write("residual.json", {"cases": cases})


def main():
    if not sys.executable.startswith("/usr/bin/python3"):
        print("warning: run with Debian's /usr/bin/python3", file=sys.stderr)
    gen_butter()
    gen_sosfiltfilt()
    gen_rotvec()
    gen_residual()


if __name__ == "__main__":
    main()
