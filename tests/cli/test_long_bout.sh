#!/usr/bin/env bash
# A 24-hour recording staged as one REM bout is scored in bounded memory: peak
# resident memory (GNU time's maximum resident set size) stays under 64 MiB
# with the default blocks on one and two threads; one and two threads give
# the same result byte for byte; and the result agrees with the same night
# scored with a block large enough to hold the whole bout (--block-s 90000)
# within the stated tolerance (docs/scoring.md, "Long bouts"): every index's
# numerator within 2 of its units and the REM Atonia Index within 0.001, at
# most 0.1 % of the audit table's rows different. (The band-pass rounds
# differently where its own blocks fall, about 1e-9 of the signal's peak:
# enough to move a sample that lies exactly at a threshold, and with it a
# mini-epoch whose share lies exactly at 50 %.) 64 MiB is the memory target
# of any night (our choice: well under a small cluster job's share); a memory
# bound is not a timing.
#
# The recording is written here with numpy: one chin channel at 200 Hz (the
# AASM minimum, from memory), band-limited Gaussian noise of 1 uV rectified
# (REM atonia, from memory) with bursts of 0.3-2 s at 4-12 times that level and
# a tonic hour at 3 times it, 16-bit EDF (Kemp et al. 1992) in 1-s records.
# The whole-bout reference needs about 1.1 GB (24 bytes per sample for the
# stretch, 40 for the beats found on the chin); it is what the blocks avoid.
set -u
bin=${REMTONE_BIN:?}
work="${REMTONE_TMP:-/tmp}/long_bout"
rm -rf "$work" && mkdir -p "$work"
fails=0
ok() { echo "ok   $1"; }
bad() { echo "FAIL $1"; fails=$((fails+1)); }
[ -x /usr/bin/time ] || { echo "skip: /usr/bin/time (Debian package time) is missing"; exit 77; }
# under AddressSanitizer the resident memory is the sanitizer's (shadow memory,
# quarantine); tests/unit/test_long_bouts.c checks the blocks there
if grep -q __asan_init "$bin" 2>/dev/null; then echo "skip: a sanitizer build"; exit 77; fi
/usr/bin/python3 -c 'import numpy' 2>/dev/null || { echo "skip: python3-numpy is missing"; exit 77; }
cd "$work"

/usr/bin/python3 - <<'EOF' || { echo "FAIL writing the recording"; exit 1; }
import numpy as np
rate, hours = 200, 24
n = rate * 3600 * hours
rng = np.random.default_rng(20261202)
# band-limited noise: white noise through a 4-tap moving difference of a
# 3-tap mean (about 20-80 Hz at 200 Hz), scaled to unit standard deviation
w = rng.standard_normal(n + 8)
x = np.convolve(w, [1, 1, 1], "same")
x = x[2:] - x[:-2]
x = x[:n] / x.std()
level = np.full(n, 1.0)
t = 60.0
while t < hours * 3600 - 60:
    d = rng.uniform(0.3, 2.0)
    a, b = int(t * rate), int((t + d) * rate)
    level[a:b] = rng.uniform(4.0, 12.0)
    t += d + rng.uniform(3.0, 20.0)
level[int(5 * 3600 * rate):int(6 * 3600 * rate)] = 3.0
x *= level * np.sqrt(np.pi / 2)  # rectified mean of Gaussian noise is sigma sqrt(2/pi)
pmin, pmax, dmin, dmax = -500.0, 500.0, -32768, 32767
dig = np.clip(np.round((x - pmin) / (pmax - pmin) * (dmax - dmin) + dmin), dmin, dmax).astype("<i2")
def f(s, w): return s.encode("ascii").ljust(w)
hdr = f("0", 8) + f("X X X X", 80) + f("Startdate 01-JAN-2024 X X X", 80) + f("01.01.24", 8) \
    + f("22.00.00", 8) + f("512", 8) + f("", 44) + f(str(3600 * hours), 8) + f("1", 8) + f("1", 4)
hdr += f("Chin1-Chin2", 16) + f("AgAgCl electrode", 80) + f("uV", 8) + f("-500", 8) + f("500", 8) \
    + f("-32768", 8) + f("32767", 8) + f("HP:10Hz LP:100Hz", 80) + f(str(rate), 8) + f("", 32)
with open("night.edf", "wb") as out:
    out.write(hdr)
    out.write(dig.tobytes())
with open("stages.csv", "w") as out:
    out.write("start_s,duration_s,stage\n0,%d,R\n" % (3600 * hours))
EOF

# peak_kib NAME ARGS...: runs remtone score under GNU time, prints the peak in KiB
peak_kib() {
  local name=$1; shift
  if ! /usr/bin/time -f '%M' -o "$name.rss" "$bin" score night.edf --stages stages.csv --quiet \
      "$@" >"$name.out" 2>"$name.err"; then
    bad "$name: exit $?"; sed 's/^/    /' "$name.err" | head -5; echo 0; return
  fi
  tail -1 "$name.rss"
}
normalised() { sed 's/^\(    "run_at": \)"[^"]*"/\1"(normalised)"/' "$1"; }

limit=$((64 * 1024))
for t in 1 2; do
  kib=$(peak_kib "blocks-$t" --threads $t --json "blocks-$t.json" --minis "blocks-$t.csv")
  echo "#    24-h one-bout night, default blocks, $t thread(s): peak $((kib / 1024)) MiB"
  if [ "$kib" -gt 0 ] && [ "$kib" -le $limit ]; then ok "memory-$t-threads"
  else bad "memory-$t-threads: $kib KiB, limit $limit KiB"; fi
done
kib=$(peak_kib whole --threads 1 --block-s 90000 --json whole.json --minis whole.csv)
echo "#    the same night as one block: peak $((kib / 1024)) MiB"
for f in json csv; do
  normalised "blocks-1.$f" >b1; normalised "blocks-2.$f" >b2
  if cmp -s b1 b2; then ok "threads-1-vs-2-$f"; else bad "threads-1-vs-2-$f"; fi
done
if /usr/bin/python3 - whole.json blocks-1.json whole.csv blocks-1.csv <<'EOF'; then ok whole-vs-blocks; else bad whole-vs-blocks; fi
import json, sys
a, b = (json.load(open(p))["indices"] for p in sys.argv[1:3])
bad = 0
for k in a:
    x, y = a[k], b[k]
    if k == "rai":
        ok = abs(x["value"] - y["value"]) <= 0.001
    else:
        ok = abs(x.get("numerator", 0) - y.get("numerator", 0)) <= 2 and \
             x.get("denominator") == y.get("denominator")
    print("#    %-34s whole %s, blocks %s%s" % (k, x.get("value"), y.get("value"), "" if ok else "  <-- apart"))
    bad += not ok
rows = [open(p).read().splitlines() for p in sys.argv[3:5]]
differ = sum(r != s for r, s in zip(*rows)) + abs(len(rows[0]) - len(rows[1]))
print("#    audit rows differing: %d of %d" % (differ, len(rows[0])))
sys.exit(bad > 0 or differ > 0.001 * len(rows[0]) or len(a) < 10)
EOF

cd / && rm -rf "$work"
echo "failures: $fails"
[ "$fails" = 0 ]
