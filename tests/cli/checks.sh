# Shared by the shell tests that source it: `. checks.sh NAME` checks the
# environment CTest gives, makes and enters a fresh $work ($REMTONE_TMP/NAME)
# and sets fails=0; `. checks.sh` alone leaves $work and $fails to the caller.
# The checks below count failures in $fails: `expect` (or `check`) NAME EXIT
# CMD... compares an exit code, `has`/`hasnt` NAME FILE TEXT look for a text.
set -u
bin=${REMTONE_BIN:?}
src=${REMTONE_SOURCE:?}
py=/usr/bin/python3
if [ $# -ge 1 ]; then
  work="${REMTONE_TMP:-/tmp}/$1"
  rm -rf "$work" && mkdir -p "$work"
  cd "$work" || exit 1
  fails=0
fi
ok() { echo "ok   $1"; }
bad() { echo "FAIL $1"; fails=$((fails+1)); }
expect() { # expect NAME EXIT CMD... (stdout in $work/out, stderr in $work/err)
  local name=$1 want=$2; shift 2
  "$@" >"$work/out" 2>"$work/err"; local got=$?
  if [ "$got" = "$want" ]; then ok "$name"; else bad "$name: exit $got, want $want"; sed 's/^/    /' "$work/err" | head -5; fi
}
check() { expect "$@"; }
has() { if grep -qF -- "$3" "$2"; then ok "$1"; else bad "$1: '$3' not in $2"; sed 's/^/    /' "$2" | head -3; fi; }
hasnt() { if grep -qF -- "$3" "$2"; then bad "$1: '$3' in $2"; else ok "$1"; fi; }

# edf NAME CHANNELS [ANNOTATIONS]: a 5-minute EDF+ of 1-s records; CHANNELS is a
# Python list of (label, kind, physical range) with kind "live" (noise of
# +-300 digital units), "loud" (+-3000) or "flat"; ANNOTATIONS a Python list of
# (onset_s, duration_s, bytes). Written with tests/malformed/edf_writer.py.
edf() {
  "$py" - "$src/tests/malformed" "$@" <<'PY'
import random, sys
sys.path.insert(0, sys.argv[1])
import edf_writer as ew
name, chans = sys.argv[2], eval(sys.argv[3])
ann = eval(sys.argv[4]) if len(sys.argv) > 4 else [(0, None, b"Lights off")]
rng = random.Random(7)
noise = [rng.randint(-300, 300) for _ in range(4096)]
def sig(label, kind, phys):
    gain = {"live": 1, "loud": 10, "flat": 0}[kind]
    return ew.Signal(label, 256, phys=phys, value=lambda r, i: gain * noise[(r * 256 + i) % 4096])
open(name, "wb").write(ew.edf_bytes([sig(*c) for c in chans], 300, plus=True, annotations=ann))
PY
}

# ends the test: the count, and the exit status CTest reads
finish() { echo "$fails failed"; [ "$fails" = 0 ]; }
