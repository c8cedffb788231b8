"""Small EDF/EDF+/BDF writer for test inputs: the malformed corpus and the
fuzz seeds start from well-formed files made here and then break one thing.

Layout from the EDF specification (Kemp et al. 1992, Electroencephalogr Clin
Neurophysiol 82:391-393) and EDF+ (Kemp & Olivan 2003, Clin Neurophysiol
114:1755-1761): a 256-byte main header, then each signal-header field for all
signals in turn, then data records of 2-byte (EDF) or 3-byte (BDF) little-endian
samples; EDF+ annotations are TALs "+onset[\\x15duration]\\x14text\\x14\\x00"
in a signal labelled "EDF Annotations", each record starting with a
time-keeping TAL. Only the Python standard library is used."""
import struct


def field(text, width):
    data = text.encode("latin-1") if isinstance(text, str) else text
    if len(data) > width:
        raise ValueError("field %r longer than %d" % (text, width))
    return data + b" " * (width - len(data))


class Signal:
    def __init__(self, label, rate_per_record, unit="uV", phys=(-500.0, 500.0),
                 dig=(-32768, 32767), transducer="AgAgCl electrode", prefilter="HP:10Hz LP:100Hz",
                 value=lambda rec, i: 0):
        self.label, self.n, self.unit, self.phys, self.dig = label, rate_per_record, unit, phys, dig
        self.transducer, self.prefilter, self.value = transducer, prefilter, value


def num(x):
    text = "%g" % x if isinstance(x, float) else str(x)
    return text[:8]


def tal(onset, text="", duration=None):
    out = ("%+g" % onset).encode()
    if duration is not None:
        out += b"\x15" + ("%g" % duration).encode()
    out += b"\x14" + (text.encode("utf-8") if isinstance(text, str) else text) + b"\x14\x00"
    return out


def edf_bytes(signals, n_records, record_s=1.0, plus=False, bdf=False, annotations=(),
              ann_bytes_per_record=120, header_overrides=None, version=None):
    """annotations: list of (onset_s, duration_s or None, text) spread one per
    record after the time-keeping TAL. header_overrides: {name: raw bytes}
    for the main fields by name ("records", "duration", ...)."""
    width = 3 if bdf else 2
    sigs = list(signals)
    if plus:
        ann_samples = (ann_bytes_per_record + width - 1) // width
        lim = (-8388608, 8388607) if bdf else (-32768, 32767)
        sigs.append(Signal("BDF Annotations" if bdf else "EDF Annotations", ann_samples, unit="",
                           phys=(-1.0, 1.0), dig=lim, transducer="", prefilter=""))
    ns = len(sigs)
    main = {
        "version": version if version is not None else (b"\xffBIOSEMI" if bdf else b"0       "),
        "patient": field("X M 01-JAN-1950 Demo_Sleeper" if plus else "demo sleeper", 80),
        "recording": field("Startdate 02-MAR-2024 X demo_lab X" if plus else "demo night", 80),
        "date": field("02.03.24", 8),
        "time": field("22.30.00", 8),
        "header": field(str(256 * (ns + 1)), 8),
        "reserved": field(("BDF+C" if bdf else "EDF+C") if plus else ("24BIT" if bdf else ""), 44),
        "records": field(str(n_records), 8),
        "duration": field(num(record_s), 8),
        "ns": field(str(ns), 4),
    }
    if header_overrides:
        for k, v in header_overrides.items():
            main[k] = v
    head = b"".join(main[k] for k in ("version", "patient", "recording", "date", "time", "header",
                                       "reserved", "records", "duration", "ns"))
    cols = [
        [field(s.label, 16) for s in sigs], [field(s.transducer, 80) for s in sigs],
        [field(s.unit, 8) for s in sigs], [field(num(s.phys[0]), 8) for s in sigs],
        [field(num(s.phys[1]), 8) for s in sigs], [field(str(s.dig[0]), 8) for s in sigs],
        [field(str(s.dig[1]), 8) for s in sigs], [field(s.prefilter, 80) for s in sigs],
        [field(str(s.n), 8) for s in sigs], [field("", 32) for s in sigs],
    ]
    head += b"".join(b"".join(c) for c in cols)
    pending = list(annotations)
    data = bytearray()
    for r in range(n_records):
        for s in sigs:
            if plus and s is sigs[-1]:
                block = tal(r * record_s)
                while pending and len(block) + len(tal(*_ann(pending[0]))) <= s.n * width:
                    block += tal(*_ann(pending.pop(0)))
                block = block[:s.n * width]
                data += block + b"\x00" * (s.n * width - len(block))
                continue
            for i in range(s.n):
                v = max(s.dig[0], min(s.dig[1], int(s.value(r, i))))
                data += struct.pack("<i", v)[:width]
    return head + bytes(data)


def _ann(a):
    onset, duration, text = a
    return onset, text, duration
