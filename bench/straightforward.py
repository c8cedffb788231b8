"""The comparison script of the benchmark: the same night scored the
straightforward way, with numpy and scipy, so bench_score can print how long
an interpreted pipeline of the same steps takes on the same machine in the
same run. It is a yardstick for speed, not a reference for values (the
reference checks live in tests/ref/).

Steps, each as plainly as numpy allows:
- the EDF header parsed and the data records mapped with numpy (EDF
  specification, Kemp et al. 1992: 256 header bytes plus 256 per signal, then
  records of every signal's samples as 16-bit little-endian integers);
- each EMG channel (chin, both arms, both legs) band-passed 10-100 Hz with
  scipy.signal.sosfiltfilt (4th-order Butterworth, zero-phase) over each REM
  bout with 10 s of signal each side, and the chin over NREM for its
  reference level;
- 0.1-s mean rectified amplitude; per 3-s mini-epoch "phasic" when a 0.1-5 s
  run exceeds 4x the REM background (the median), "any" when a run of at
  least 0.1 s exceeds 2x; per 30-s
  epoch "tonic" when more than half the epoch is above twice the NREM
  minimum (the shape of the AASM, SINBAR and Montreal definitions);
- the REM Atonia Index (Ferri et al. 2010) from 1-s mean amplitudes less the
  minimum of the 60-s window around each.

Usage: python3 straightforward.py NIGHT.edf STAGES.csv -> one line of indices.
Exit 77 when numpy or scipy is missing."""

import csv
import sys

try:
    import numpy as np
    import scipy.signal
    from numpy.lib.stride_tricks import sliding_window_view
except ImportError as exc:  # pragma: no cover - depends on the machine
    print(f"skipped: {exc}")
    sys.exit(77)

EMG = ("chin", "fds", "tib")
PAD_S = 10.0


def read_edf(path):
    with open(path, "rb") as f:
        head = f.read(256)
        ns = int(head[252:256])
        sig = f.read(256 * ns)
    n_records = int(head[236:244])
    record_s = float(head[244:252])

    def field(offset, width):
        return [sig[offset * ns + i * width: offset * ns + (i + 1) * width].decode("latin-1").strip()
                for i in range(ns)]

    labels = field(0, 16)
    pmin = np.array(field(104, 8), float)
    pmax = np.array(field(112, 8), float)
    dmin = np.array(field(120, 8), float)
    dmax = np.array(field(128, 8), float)
    spr = np.array(field(216, 8), int)
    data = np.memmap(path, np.dtype("<i2"), "r", 256 * (ns + 1), (n_records, int(spr.sum())))
    starts = np.concatenate(([0], np.cumsum(spr)))

    def channel(i):
        d = data[:, starts[i]:starts[i + 1]].reshape(-1).astype(float)
        gain = (pmax[i] - pmin[i]) / (dmax[i] - dmin[i])
        return (d - dmin[i]) * gain + pmin[i], spr[i] / record_s

    return labels, channel


def bouts(stages_csv, want):
    runs = []
    with open(stages_csv, newline="") as f:
        for row in csv.DictReader(f):
            if row["stage"] not in want:
                continue
            a, b = float(row["start_s"]), float(row["start_s"]) + float(row["duration_s"])
            if runs and abs(runs[-1][1] - a) < 1e-9:
                runs[-1][1] = b
            else:
                runs.append([a, b])
    return runs


def filtered(x, rate, a, b, sos):
    first, last = int(round(a * rate)), int(round(b * rate))
    pad = int(round(PAD_S * rate))
    pf, pl = max(0, first - pad), min(len(x), last + pad)
    return np.abs(scipy.signal.sosfiltfilt(sos, x[pf:pl]))[first - pf:last - pf]


def means(y, n):
    k = len(y) // n
    return y[: k * n].reshape(k, n).mean(axis=1)


def main():
    edf, stages = sys.argv[1], sys.argv[2]
    labels, channel = read_edf(edf)
    rem = bouts(stages, {"R"})
    nrem = bouts(stages, {"N1", "N2", "N3"})
    counts = {}
    rai = float("nan")
    for i, label in enumerate(labels):
        if not any(k in label.lower() for k in EMG):
            continue
        x, rate = channel(i)
        sos = scipy.signal.butter(4, [10.0, 100.0], "bandpass", fs=rate, output="sos")
        tenth = int(round(rate / 10))
        reference = np.inf
        if "chin" in label.lower():
            for a, b in nrem:
                env = means(filtered(x, rate, a, b, sos), int(round(rate)))
                if len(env):
                    reference = min(reference, np.percentile(env, 5))
        phasic = anyact = tonic = minis = epochs = 0
        p1 = p2 = total = 0
        for a, b in rem:
            y = filtered(x, rate, a, b, sos)
            env = means(y, tenth)
            background = np.median(env)
            for level, add in ((4.0, "phasic"), (2.0, "any")):
                above = np.concatenate(([False], env > level * background, [False]))
                edges = np.flatnonzero(np.diff(above.astype(np.int8)))
                on, off = edges[::2], edges[1::2]
                keep = off - on >= 1
                if add == "phasic":
                    keep &= off - on <= 50
                hit = np.zeros(len(env) // 30 + 1, bool)
                hit[on[keep] // 30] = True
                if add == "phasic":
                    phasic += int(hit.sum())
                else:
                    anyact += int(hit.sum())
            minis += len(env) // 30
            sec = means(y, int(round(rate)))
            if np.isfinite(reference):
                ep = sec[: len(sec) // 30 * 30].reshape(-1, 30)
                tonic += int(np.sum((ep > 2 * reference).mean(axis=1) > 0.5))
                epochs += len(ep)
            if "chin" in label.lower() and len(sec) >= 60:
                padded = np.pad(sec, 30, mode="edge")
                floor = sliding_window_view(padded, 60).min(axis=1)[: len(sec)]
                v = sec - floor
                p1 += int(np.sum(v <= 1.0))
                p2 += int(np.sum((v > 1.0) & (v <= 2.0)))
                total += len(v)
        counts[label] = (phasic, anyact, minis, tonic, epochs)
        if total:
            rai = (100.0 * p1 / total) / (100.0 - 100.0 * p2 / total)
    parts = [f"{k}: phasic {v[0]}/{v[2]}, any {v[1]}/{v[2]}" for k, v in counts.items()]
    print(f"RAI {rai:.3f}; " + "; ".join(parts))


if __name__ == "__main__":
    main()
