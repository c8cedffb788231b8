#!/usr/bin/python3
"""Cross-check of remtone's recording reader against MNE-Python.

The reference reader is mne.io.read_raw_edf / mne.io.read_raw_bdf from the
Debian package python3-mne, an EEG/MEG toolkit independent of EDFlib. The test
files are written here byte by byte from the EDF and EDF+ specifications
(Kemp et al. 1992; Kemp & Olivan 2003) and the BDF variant (BioSemi: 24-bit
samples, version "\\xffBIOSEMI"), so neither reader wrote them. Both readers
must give the same samples in microvolts within half a digital step (the
file's own resolution), the samples both readers report must match the
physical values computed here from the digital ones, and annotation onsets and
texts must agree.

Run by CTest with /usr/bin/python3; REMTONE_TOOLS names the folder holding
rt_dump, REMTONE_TMP a scratch folder. Exits 77 (skipped) when mne is missing.
"""
import json
import os
import subprocess
import sys

try:
    import numpy as np
    import mne
except ImportError as exc:  # python3-mne / python3-numpy not installed
    print(f"skipped: python3-mne (Debian) cannot be imported: {exc}")
    sys.exit(77)

mne.set_log_level("ERROR")

SEED = int(os.environ.get("REMTONE_SEED", "20261201"))
TOOLS = os.environ.get("REMTONE_TOOLS", ".")
TMP = os.environ.get("REMTONE_TMP", "/tmp")

# Fictional signals: label, unit, physical range, digital range, samples per record.
EDF_SIGNALS = [
    ("Chin1-Chin2", "uV", (-500.0, 500.0), (-32768, 32767), 512),
    ("C4-M1", "uV", (-250.0, 250.0), (-2048, 2047), 256),
    ("Leg L", "mV", (-1.2, 1.2), (-10000, 10000), 400),
    ("Arm R", "mV", (-3.0, 5.0), (-20000, 30000), 100),
]
RECORD_S = 2.0
N_RECORDS = 6
ANNOTATIONS = [  # onset_s, duration_s or None, text
    (0.5, 30.0, "Sleep stage W"),
    (2.25, None, "Lights off"),
    (7.125, 1.5, "Arousal"),
    (9.0, 30.0, "Sleep stage R"),
]
ANNOT_SAMPLES = 60  # bytes of TAL space per record: 2 * 60


def field(text, width):
    data = text.encode("ascii")
    assert len(data) <= width, text
    return data.ljust(width, b" ")


def number(value, width=8):
    text = f"{value}"
    if len(text) > width and isinstance(value, float):
        text = f"{value:.{width - 2}g}"
    return field(text, width)


def main_header(version, reserved, n_signals, n_records):
    return b"".join([
        version,
        field("X F 01-JAN-1950 Demo_Sleeper", 80),       # EDF+ patient subfields
        field("Startdate 01-DEC-2026 X X remtone_test", 80),
        field("01.12.26", 8), field("22.30.00", 8),
        number(256 * (n_signals + 1)), field(reserved, 44),
        number(n_records), number(int(RECORD_S) if RECORD_S.is_integer() else RECORD_S),
        number(n_signals, 4),
    ])


def signal_headers(signals):
    """signals: (label, unit, (pmin, pmax), (dmin, dmax), spr); fields stored
    field by field as the EDF specification lays them out."""
    columns = [
        [field(s[0], 16) for s in signals],
        [field("AgAgCl electrode" if s[1] else "", 80) for s in signals],
        [field(s[1], 8) for s in signals],
        [number(s[2][0]) for s in signals],
        [number(s[2][1]) for s in signals],
        [number(s[3][0]) for s in signals],
        [number(s[3][1]) for s in signals],
        [field("HP:10Hz LP:100Hz" if s[1] else "", 80) for s in signals],
        [number(s[4]) for s in signals],
        [field("", 32) for s in signals],
    ]
    return b"".join(b"".join(c) for c in columns)


def tal_record(record, annotations):
    """EDF+ annotation signal content of one record: the time-keeping TAL,
    then the annotations (all in the first record here)."""
    onset = record * RECORD_S
    out = f"+{onset:g}\x14\x14\x00".encode()
    for start, duration, text in (annotations if record == 0 else []):
        dur = f"\x15{duration:g}" if duration is not None else ""
        out += f"+{start:g}{dur}\x14{text}\x14\x00".encode()
    assert len(out) <= 2 * ANNOT_SAMPLES
    return out.ljust(2 * ANNOT_SAMPLES, b"\x00")


def random_digital(rng, signals, bits):
    return [rng.integers(s[3][0], s[3][1] + 1, size=s[4] * N_RECORDS, dtype=np.int64) for s in signals]


def encode(values, nbytes):
    values = np.asarray(values, dtype=np.int64) & ((1 << (8 * nbytes)) - 1)
    raw = np.zeros((len(values), nbytes), dtype=np.uint8)
    for b in range(nbytes):
        raw[:, b] = (values >> (8 * b)) & 0xFF
    return raw.tobytes()


def write_edfplus(path, rng):
    annot = ("EDF Annotations", "", (-1.0, 1.0), (-32768, 32767), ANNOT_SAMPLES)
    signals = EDF_SIGNALS + [annot]
    digital = random_digital(rng, EDF_SIGNALS, 16)
    body = b""
    for r in range(N_RECORDS):
        for s, d in zip(EDF_SIGNALS, digital):
            body += encode(d[r * s[4]:(r + 1) * s[4]], 2)
        body += tal_record(r, ANNOTATIONS)
    head = main_header(field("0", 8), "EDF+C", len(signals), N_RECORDS) + signal_headers(signals)
    with open(path, "wb") as f:
        f.write(head + body)
    return digital


BDF_SIGNALS = [
    ("Chin", "uV", (-262144.0, 262143.0), (-8388608, 8388607), 512),
    ("FDS L", "uV", (-1000.0, 1000.0), (-100000, 100000), 256),
    ("ECG", "mV", (-5.0, 5.0), (-2000000, 2000000), 128),
]


def write_bdf(path, rng):
    digital = random_digital(rng, BDF_SIGNALS, 24)
    body = b""
    for r in range(N_RECORDS):
        for s, d in zip(BDF_SIGNALS, digital):
            body += encode(d[r * s[4]:(r + 1) * s[4]], 3)
    head = main_header(b"\xffBIOSEMI", "24BIT", len(BDF_SIGNALS), N_RECORDS) + signal_headers(BDF_SIGNALS)
    with open(path, "wb") as f:
        f.write(head + body)
    return digital


def uv_factor(unit):
    return {"uV": 1.0, "mV": 1e3, "V": 1e6}[unit]


def physical_uv(sig, dig):
    """EDF specification: physical = pmin + (dig - dmin) * (pmax - pmin) / (dmax - dmin)."""
    (pmin, pmax), (dmin, dmax) = sig[2], sig[3]
    return (pmin + (dig - dmin) * (pmax - pmin) / (dmax - dmin)) * uv_factor(sig[1])


def run_dump(*args):
    exe = os.path.join(TOOLS, "rt_dump")
    out = subprocess.run([exe, *map(str, args)], check=True, capture_output=True, text=True)
    return out.stdout


failures = []


def check(ok, what):
    if not ok:
        failures.append(what)
        print("FAIL:", what)


def read_one_channel(reader, path, label, signals):
    """mne resamples every channel to the highest rate among those it keeps,
    so each channel is read alone (the others excluded) to get its own samples."""
    others = [s[0] for s in signals if s[0] != label]
    raw = reader(path, preload=True, exclude=others)
    return raw.get_data(picks=[raw.ch_names.index(label)])[0] * 1e6  # mne gives volts


def compare_samples(path, reader, signals, digital):
    ours = json.loads(run_dump(path))
    names = [c["label"] for c in ours["channels"]]
    check(names == [s[0] for s in signals], f"{path}: labels {names}")
    check(abs(ours["duration_s"] - N_RECORDS * RECORD_S) < 1e-9, f"{path}: duration {ours['duration_s']}")
    for i, (sig, dig) in enumerate(zip(signals, digital)):
        chan = ours["channels"][i]
        rate = sig[4] / RECORD_S
        check(abs(chan["rate_hz"] - rate) < 1e-9, f"{sig[0]}: rate {chan['rate_hz']} != {rate}")
        check(abs(chan["uv_per_unit"] - uv_factor(sig[1])) < 1e-12, f"{sig[0]}: uv_per_unit")
        n = len(dig)
        check(chan["n_samples"] == n, f"{sig[0]}: n_samples {chan['n_samples']} != {n}")
        got = np.array([float(v) for v in run_dump(path, i, 0, n).split()])
        mne_uv = read_one_channel(reader, path, sig[0], signals)
        step_uv = (sig[2][1] - sig[2][0]) / (sig[3][1] - sig[3][0]) * uv_factor(sig[1])
        tol = 0.5 * step_uv  # half a digital step: the file's resolution
        check(len(mne_uv) == n, f"{sig[0]}: mne has {len(mne_uv)} samples, expected {n}")
        check(np.max(np.abs(got - mne_uv)) <= tol, f"{sig[0]}: remtone vs mne differ by "
              f"{np.max(np.abs(got - mne_uv))} uV > {tol}")
        check(np.max(np.abs(got - physical_uv(sig, dig))) <= tol, f"{sig[0]}: remtone vs spec formula")
        mid = n // 3
        part = np.array([float(v) for v in run_dump(path, i, mid, 17).split()])
        check(np.array_equal(part, got[mid:mid + 17]), f"{sig[0]}: ranged read differs from full read")
    return ours


def compare_annotations(ours, raw):
    theirs = [(float(o), str(d)) for o, d in zip(raw.annotations.onset, raw.annotations.description)]
    mine = [(a["onset_s"], a["text"]) for a in ours["annotations"]]
    check(len(mine) == len(theirs) == len(ANNOTATIONS), f"annotation counts {len(mine)} / {len(theirs)}")
    for (o1, t1), (o2, t2), (o3, d3, t3) in zip(mine, theirs, sorted(ANNOTATIONS)):
        check(abs(o1 - o2) < 1e-6 and t1 == t2 == t3 and abs(o1 - o3) < 1e-6,
              f"annotation remtone ({o1}, {t1}) mne ({o2}, {t2}) written ({o3}, {t3})")
    for a, (_, d3, _) in zip(ours["annotations"], sorted(ANNOTATIONS)):
        want = d3 if d3 is not None else -1.0  # remtone: negative when absent
        check(abs(a["duration_s"] - want) < 1e-6, f"annotation {a['text']}: duration {a['duration_s']}")


def main():
    print(f"# seed {SEED} (set REMTONE_SEED to repeat); reference: python3-mne {mne.__version__}")
    rng = np.random.default_rng(SEED)
    edf = os.path.join(TMP, "mne_check.edf")
    digital = write_edfplus(edf, rng)
    raw = mne.io.read_raw_edf(edf, preload=True)
    ours = compare_samples(edf, mne.io.read_raw_edf, EDF_SIGNALS, digital)
    check(ours["kind"] == "EDF+", f"kind {ours['kind']}")
    compare_annotations(ours, raw)

    bdf = os.path.join(TMP, "mne_check.bdf")
    digital = write_bdf(bdf, rng)
    ours = compare_samples(bdf, mne.io.read_raw_bdf, BDF_SIGNALS, digital)
    check(ours["kind"] == "BDF", f"kind {ours['kind']}")

    if failures:
        print(f"{len(failures)} check(s) failed")
        return 1
    print("remtone and mne agree")
    return 0


if __name__ == "__main__":
    sys.exit(main())
