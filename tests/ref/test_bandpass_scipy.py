"""Checks the conditioning band-pass (src/score/bandpass.c, through the
tests/tools/rt_filter helper) against independent references built from
numpy and scipy:

1. The gain formula against scipy.signal.sosfreqz of scipy.signal.butter
   high-pass and low-pass sections: G = |H_hp|^2 |H_lp|^2 (the Butterworth
   magnitude, squared by the forward-backward pass), times the notch formula.
2. Filtering against a whole-signal FFT: numpy.pad(x, P, 'reflect'), one
   scipy.fft.rfft over the padded signal, multiplied by that same scipy-derived
   response on its own frequency grid, inverse transform, crop.
3. Filtering against scipy.signal.sosfiltfilt with the same two sections
   (time-domain forward-backward IIR filtering), away from the edges where
   sosfiltfilt's own padding transients have decayed.
4. A band-pass design, scipy.signal.butter(4, [fl, fh], 'bandpass'): not the
   same response (a band-pass transform is not the product of a high-pass and
   a low-pass), so only steady-state sine amplitudes are compared loosely.

Signals: seeded white noise (seed printed), sines at 5, 10, 30, 60, 100 and
150 Hz, a burst with sharp edges; lengths from 1 sample to 300 s at 512 Hz,
odd and even, shorter than one block and spanning many blocks.
Exit 77 when numpy or scipy cannot be imported (Debian python3-scipy)."""

import os
import subprocess
import sys

try:
    import numpy as np
    import scipy.fft
    import scipy.signal
except ImportError as exc:  # pragma: no cover - depends on the machine
    print(f"skipped: numpy/scipy not importable with {sys.executable}: {exc}")
    sys.exit(77)

TOOL = os.path.join(os.environ.get("REMTONE_TOOLS", "."), "rt_filter")
TMP = os.environ.get("REMTONE_TMP", "/tmp")
SEED = int(os.environ.get("REMTONE_SEED", "20261201"))
print(f"# seed {SEED} (set REMTONE_SEED to repeat)")
RNG = np.random.default_rng(SEED)

failures = []


def check(cond, what):
    print(("ok   " if cond else "FAIL ") + what)
    if not cond:
        failures.append(what)


def spec_args(rate, low=10.0, high=100.0, order=4, notches=(), width=2.0, block=0):
    args = ["--rate", repr(rate), "--low", repr(low), "--high", repr(high),
            "--order", str(order), "--notch-width", repr(width), "--block", str(block)]
    for fc in notches:
        args += ["--notch", repr(fc)]
    return args


def tool(mode, args, extra=()):
    out = subprocess.run([TOOL, mode] + args + list(extra), check=True,
                         capture_output=True, text=True).stdout
    return out


def info(args):
    low, high, block, margin = tool("info", args).split()
    return float(low), float(high), int(block), int(margin)


def ours_gain(args, freqs):
    out = tool("gain", args, [repr(float(f)) for f in freqs])
    return np.array([float(line.split()[1]) for line in out.splitlines()])


def ours_filter(x, args):
    src = os.path.join(TMP, "bandpass_in.f64")
    dst = os.path.join(TMP, "bandpass_out.f64")
    np.asarray(x, dtype="<f8").tofile(src)
    subprocess.run([TOOL, "filter"] + args + [src, dst], check=True)
    return np.fromfile(dst, dtype="<f8")


def sections(rate, low, high, order):
    hp = scipy.signal.butter(order, low, "highpass", fs=rate, output="sos")
    lp = scipy.signal.butter(order, high, "lowpass", fs=rate, output="sos")
    return hp, lp


def scipy_gain(freqs, rate, low, high, order, notches=(), width=2.0):
    """|H_hp|^2 |H_lp|^2 from scipy, times the notch definition of bandpass.h:
    1 - 2^(-((f - c)/(w/2))^2) for c in {fc, -fc, rate - fc}."""
    freqs = np.asarray(freqs, dtype=float)
    hp, lp = sections(rate, low, high, order)
    _, h_hp = scipy.signal.sosfreqz(hp, worN=freqs, fs=rate)
    _, h_lp = scipy.signal.sosfreqz(lp, worN=freqs, fs=rate)
    g = np.abs(h_hp) ** 2 * np.abs(h_lp) ** 2
    for fc in notches:
        for c in (fc, -fc, rate - fc):
            g *= 1.0 - 2.0 ** (-((freqs - c) / (width / 2)) ** 2)
    return g


def fft_reference(x, rate, low, high, order, margin, notches=(), width=2.0):
    """Whole-signal FFT filter, padded by reflection far beyond our margin."""
    pad = 4 * margin
    xp = np.pad(x, pad, mode="reflect") if len(x) > 1 else np.full(len(x) + 2 * pad, x[0])
    freqs = scipy.fft.rfftfreq(len(xp), d=1.0 / rate)
    g = scipy_gain(freqs, rate, low, high, order, notches, width)
    y = scipy.fft.irfft(scipy.fft.rfft(xp) * g, n=len(xp))
    return y[pad:pad + len(x)]


def sine_fit(y, t, f):
    """Least-squares in-phase and quadrature amplitudes of y at frequency f."""
    a = np.column_stack([np.sin(2 * np.pi * f * t), np.cos(2 * np.pi * f * t)])
    coef, *_ = np.linalg.lstsq(a, y, rcond=None)
    return coef


# 1. Gain formula ------------------------------------------------------------
for rate, notches in ((512.0, ()), (200.0, ()), (256.0, (50.0,)), (1000.0, (60.0, 120.0))):
    args = spec_args(rate, notches=notches)
    low, high, _, _ = info(args)
    freqs = np.linspace(0.0, rate / 2, 2001)[1:]
    diff = np.max(np.abs(ours_gain(args, freqs) - scipy_gain(freqs, rate, low, high, 4, notches)))
    # butter() computes poles and zeros in floating point: agreement to ~1e-12
    # is expected; 1e-9 leaves room for other math libraries.
    check(diff < 1e-9, f"gain = |H_hp|^2 |H_lp|^2 x notches of scipy butter at {rate} Hz, "
          f"notches {notches}: max diff {diff:.2e} < 1e-9")

args512 = spec_args(512.0)
g = ours_gain(args512, [1.0, 10.0, 30.0, 40.0, 60.0, 100.0, 250.0])
# Butterworth: |H(fc)|^2 = 1/2 at the corner, i.e. -3 dB per pass, -6 dB after
# forward and backward (standard Butterworth magnitude formula).
check(abs(g[1] - 0.5) < 1e-6 and abs(g[5] - 0.5) < 1e-6,
      f"zero-phase gain 0.5 at 10 Hz ({g[1]:.9f}) and 100 Hz ({g[5]:.9f})")
check(np.all(g[2:5] > 0.99) and np.all(g[2:5] <= 1.0), f"passband 30-60 Hz within 1 % of 1: {g[2:5]}")
# order 4, squared: (1/10)^16 analog asymptote -> ~1e-8 at 1 Hz; at 250 Hz the
# bilinear transform puts a zero at Nyquist (256 Hz), so rejection is deeper.
check(g[0] < 1e-7, f"1 Hz rejected below -140 dB: {g[0]:.2e}")
check(g[6] < 1e-6, f"250 Hz rejected below -120 dB at 512 Hz: {g[6]:.2e}")

low, high, _, _ = info(spec_args(200.0))
check(high == 90.0, f"100 Hz corner clipped to 0.45 x 200 Hz = 90 Hz: {high}")
w = 2.0
gn = ours_gain(spec_args(256.0, notches=(50.0,), width=w), [49.0, 50.0, 51.0, 50.0 + 1.331 * w / 2])
check(gn[1] < 1e-12, f"notch: gain at 50 Hz is 0 ({gn[1]:.1e})")
rel = gn[0] / ours_gain(spec_args(256.0), [49.0])[0]
check(abs(rel - 0.5) < 1e-9, f"notch: half gain at the half width, 49 Hz ({rel:.12f})")
rel3 = gn[3] / ours_gain(spec_args(256.0), [50.0 + 1.331 * w / 2])[0]
check(abs(rel3 - 2 ** -0.5) < 1e-3, f"notch: -3 dB full width is 1.331 x notch width ({rel3:.5f})")


# 2. Whole-signal FFT reference --------------------------------------------------
def signals(rate, n):
    t = np.arange(n) / rate
    out = {"noise": RNG.standard_normal(n)}
    for f in (5.0, 10.0, 30.0, 60.0, 100.0, 150.0):
        if f < rate / 2:
            out[f"sine {f:g} Hz"] = np.sin(2 * np.pi * f * t + 0.3) + 0.5
    burst = 0.1 * RNG.standard_normal(n)
    burst[n // 3: n // 3 + max(1, n // 10)] += 5.0 * RNG.standard_normal(max(1, n // 10)) + 3.0
    out["burst"] = burst
    return out


cases = [
    (512.0, 153600, ()),      # 300 s: dozens of 4096-sample blocks
    (512.0, 100001, ()),      # odd length, several blocks
    (512.0, 1000, ()),        # shorter than one block
    (512.0, 37, ()),          # shorter than the margin: repeated reflection
    (512.0, 1, ()),
    (200.0, 20011, ()),       # high corner clipped to 90 Hz
    (256.0, 30001, (50.0,)),  # mains notch
]
for rate, n, notches in cases:
    args = spec_args(rate, notches=notches)
    low, high, block, margin = info(args)
    worst = 0.0
    for name, x in signals(rate, n).items():
        y = ours_filter(x, args)
        ref = fft_reference(x, rate, low, high, 4, margin, notches)
        scale = max(np.max(np.abs(x)), 1e-300)
        err = np.max(np.abs(y - ref)) / scale
        worst = max(worst, err)
        if err >= 1e-8:
            print(f"     {name}: error {err:.2e} of max|x|")
    # The margin rule bounds each method's truncation error by 1e-9 x peak|h|
    # x max|x| (peak|h| < 1); identical reflection means edges must agree too.
    # 1e-8 leaves 10x for the grid difference and rounding.
    check(worst < 1e-8, f"FFT reference, {rate} Hz, n={n}, block {block}, margin {margin}, "
          f"notches {notches}: max error {worst:.2e} x max|x| < 1e-8 (edges included)")


# 3. sosfiltfilt with the same sections ----------------------------------------------
rate, n = 512.0, 153600
args = spec_args(rate)
low, high, _, margin = info(args)
hp, lp = sections(rate, low, high, 4)
sos = np.vstack([hp, lp])
inner = slice(int(5 * rate), n - int(5 * rate))
for name, x in signals(rate, n).items():
    y = ours_filter(x, args)
    ref = scipy.signal.sosfiltfilt(sos, x)
    err = np.max(np.abs(y[inner] - ref[inner])) / np.max(np.abs(x))
    # sosfiltfilt's edge transients decay like the slowest pole (about e^-24 per
    # second at 10 Hz, order 4); 5 s in, they are below 1e-40, so only rounding
    # of the IIR recursion (~1e-12) separates the two.
    check(err < 1e-9, f"sosfiltfilt(butter hp+lp) {name}, more than 5 s from the edges: "
          f"max error {err:.2e} x max|x| < 1e-9")

# Steady-state gains and zero phase from sine fits, 5 s from the edges.
t = np.arange(n) / rate
for f, expect in ((10.0, 0.5), (100.0, 0.5), (40.0, None)):
    x = np.sin(2 * np.pi * f * t)
    y = ours_filter(x, args)
    s, c = sine_fit(y[inner], t[inner], f)
    ref = scipy_gain([f], rate, low, high, 4)[0] if expect is None else expect
    check(abs(s - ref) < 1e-6 and abs(c) < 1e-9,
          f"sine {f:g} Hz: in-phase amplitude {s:.9f} (expected {ref:.9f}), "
          f"quadrature {c:.1e} (zero phase)")

# 4. Band-pass design: different response, so loose steady-state comparison.
bp = scipy.signal.butter(4, [10.0, 100.0], "bandpass", fs=rate, output="sos")
for f in (5.0, 40.0, 150.0):
    x = np.sin(2 * np.pi * f * t)
    a_ours = np.hypot(*sine_fit(ours_filter(x, args)[inner], t[inner], f))
    a_bp = np.hypot(*sine_fit(scipy.signal.sosfiltfilt(bp, x)[inner], t[inner], f))
    if f == 40.0:
        ok = abs(a_ours - a_bp) < 0.01
    else:
        ok = a_ours < 0.02 and a_bp < 0.02
    check(ok, f"butter(4, [10, 100], 'bandpass') vs ours at {f:g} Hz: {a_bp:.4f} vs {a_ours:.4f}")

if failures:
    print(f"{len(failures)} check(s) failed")
    sys.exit(1)
print("all checks passed")
