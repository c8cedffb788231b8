#!/usr/bin/python3
"""Writes the binary and large members of the malformed-input corpus into the
folder given as argument (tests/cli/test_malformed.sh calls it; expected.tsv
names every case). Each file starts from the same small well-formed recording,
good.edf (5 minutes, a chin EMG channel at 256 Hz and an EDF+ annotation
signal), and breaks one thing. Deterministic; standard library only.

Field layout and limits: EDF (Kemp et al. 1992), EDF+ (Kemp & Olivan 2003),
BDF (BioSemi: 24-bit samples, "\\xffBIOSEMI" version)."""
import os
import random
import sys

HERE = os.path.dirname(os.path.abspath(__file__))
sys.path.insert(0, HERE)
import edf_writer as ew  # noqa: E402

RECORDS = 300          # 1-s records: 5 minutes, 10 epochs of 30 s
CHIN_HZ = 256          # above the AASM minimum of 200 Hz (AASM Manual, from memory)

# signal header field offsets for ns signals (EDF spec: fields stored field by field)
WIDTHS = [16, 80, 8, 8, 8, 8, 8, 80, 8, 32]


def sig_offset(ns, field, k):
    return 256 + sum(w * ns for w in WIDTHS[:field]) + WIDTHS[field] * k


def chin(**kw):
    rng = random.Random(7)
    noise = [rng.randint(-300, 300) for _ in range(4096)]
    args = dict(phys=(-500.0, 500.0), value=lambda r, i: noise[(r * CHIN_HZ + i) % 4096])
    args.update(kw)
    return ew.Signal("Chin1-Chin2", CHIN_HZ, **args)


def good(**kw):
    return ew.edf_bytes([chin(**kw)], RECORDS, plus=True, annotations=[(0, None, "Lights off")])


def patch(data, offset, text, width):
    data = bytearray(data)
    data[offset:offset + width] = ew.field(text, width)
    return bytes(data)


def main(out):
    os.makedirs(out, exist_ok=True)
    g = good()
    ns = 2
    record_bytes = (CHIN_HZ + 60) * 2
    header = 256 * (ns + 1)
    files = {
        "good.edf": g,
        "empty.edf": b"",
        "trunc-header.edf": g[:200],
        "trunc-signal-header.edf": g[:256 + 300],
        "trunc-mid-record.edf": g[:header + 10 * record_bytes + record_bytes // 2],
        "lying-record-count.edf": patch(g, 236, "99999", 8),
        "unknown-record-count.edf": patch(g, 236, "-1", 8),
        "zero-record-duration.edf": patch(g, 244, "0", 8),
        "negative-record-duration.edf": patch(g, 244, "-1", 8),
        "phys-min-equals-max.edf": patch(patch(g, sig_offset(ns, 3, 0), "100", 8), sig_offset(ns, 4, 0), "100", 8),
        "digital-range-edf.edf": patch(g, sig_offset(ns, 6, 0), "40000", 8),
        "unit-not-voltage.edf": good(unit="degC"),
        # +-9999999 uV (about 10 V): the widest plain decimal an 8-byte field holds
        "absurd-range.edf": good(phys=(-9999999, 9999999)),
        # number forms strtod takes but EDF does not: the header allows plain
        # decimals only (Kemp et al. 1992; EDF+, Kemp & Olivan 2003, 2.1.3)
        "phys-min-hex-float.edf": patch(g, sig_offset(ns, 3, 0), "0x1p0", 8),
        "phys-max-exponent.edf": patch(g, sig_offset(ns, 4, 0), "1e-9", 8),
        "record-duration-exponent.edf": patch(g, 244, "1e0", 8),
        "record-duration-infinite.edf": patch(g, 244, "inf", 8),
        "digital-max-hex.edf": patch(g, sig_offset(ns, 6, 0), "0x10", 8),
        "samples-exponent.edf": patch(g, sig_offset(ns, 8, 0), "2.56e2", 8),
        "non-ascii-header.edf": patch(g, 8, b"Jos\xe9 X X X", 80),
        "discontinuous.edf": patch(g, 192, "EDF+D", 44),
        "trailing-bytes.edf": g + b"\x00" * 17,
        "broken-tals.edf": broken_tals(g, ns, record_bytes),
        # one rule of the EDF+ TAL sections (Kemp & Olivan 2003) broken each;
        # EDFlib refuses all of them with a bare format error
        "tal-first-record-late.edf": set_tals(g, ns, record_bytes, 0, b"+1.5\x14\x14\x00"),
        "tal-not-contiguous.edf": set_tals(g, ns, record_bytes, 5, b"+6\x14\x14\x00"),
        "tal-no-terminator.edf": set_tals(g, ns, record_bytes, 2, b"+2\x14\x14\x00+2.5\x14Arousal\x00"),
        "tal-garbage.edf": set_tals(g, ns, record_bytes, 7, b"+7\x14\x14\x00\x00junk"),
        "tal-onset-no-sign.edf": set_tals(g, ns, record_bytes, 9, b"+9\x14\x14\x009\x14Arousal\x14\x00"),
        "bdf-digital-range.edf": ew.edf_bytes([ew.Signal("Chin", 4, dig=(-9000000, 8388607))], 2, bdf=True),
    }
    # text in UTF-16 or UTF-32, as some editors save it: refused by name
    # (byte-order marks: The Unicode Standard, section 23.8)
    stages = open(os.path.join(HERE, "good-stages.csv"), encoding="utf-8").read()
    xml = open(os.path.join(HERE, "xml-good.xml"), encoding="utf-8").read()
    files["staging-utf16.csv"] = stages.encode("utf-16")          # BOM, then UTF-16LE
    files["staging-utf16be.csv"] = b"\xfe\xff" + stages.encode("utf-16-be")
    files["staging-utf16-no-bom.csv"] = stages.encode("utf-16-le")
    files["staging-utf16.xml"] = xml.replace('encoding="UTF-8"', 'encoding="UTF-16"').encode("utf-16")
    files["events-utf32.csv"] = "start_s,duration_s,type\n".encode("utf-32")
    for name, data in files.items():
        with open(os.path.join(out, name), "wb") as f:
            f.write(data)
    # larger than the 64 MiB a table may have (src/common/table.c), as a
    # sparse file: the reader refuses it from its size, before reading
    with open(os.path.join(out, "huge.csv"), "wb") as f:
        f.write(b"start_s,duration_s,stage\n")
        f.truncate(100 * 1024 * 1024)


def set_tals(g, ns, record_bytes, record, tals):
    """good.edf whose annotation signal (after the chin) in data record
    `record` (from 0) holds the bytes tals, then 0x00 to its end."""
    data = bytearray(g)
    start = 256 * (ns + 1) + record * record_bytes + CHIN_HZ * 2
    size = record_bytes - CHIN_HZ * 2
    data[start:start + size] = tals + b"\x00" * (size - len(tals))
    return bytes(data)


def broken_tals(g, ns, record_bytes):
    """good.edf whose annotation signal in record 3 holds no time-keeping TAL
    and an onset that is not a number (EDF+ section 2.2.4 requires the first
    TAL of every record to be time-keeping, onsets "+" or "-" then digits)."""
    data = bytearray(g)
    start = 256 * (ns + 1) + 3 * record_bytes + CHIN_HZ * 2
    bad = b"+x.y\x14\x14\x00+3\x15\x14oops"
    data[start:start + len(bad)] = bad
    return bytes(data)


if __name__ == "__main__":
    main(sys.argv[1])
