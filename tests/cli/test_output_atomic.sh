#!/usr/bin/env bash
# Output guarantees (docs/hardening.md): every output goes through a temporary
# file in the destination folder and a rename, so
#  - a finished run leaves no temporary file behind;
#  - an output path that is one of the inputs is refused (exit 2) and the
#    input is untouched, however the path is spelled (symlink, hard link);
#  - a write that fails (no space: /dev/full, and a full tmpfs when this
#    machine lets root mount one) exits 7, leaves no partial file and keeps
#    the previous file, also for the EDF+ files EDFlib writes;
#  - a run killed with SIGKILL in the middle of writing leaves the previous
#    file intact (a stray PATH.tmp-XXXXXX may remain, never a partial PATH).
# Exit codes: README.md "Exit codes".
set -u
bin=${REMTONE_BIN:?}
src=${REMTONE_SOURCE:?}
work="${REMTONE_TMP:-/tmp}/atomic"
mnt="$work/small-fs"
cleanup() { mountpoint -q "$mnt" 2>/dev/null && umount "$mnt"; }
trap cleanup EXIT
cleanup
rm -rf "$work" && mkdir -p "$work"
/usr/bin/python3 "$src/tests/malformed/generate.py" "$work/gen" >/dev/null || { echo "FAIL generate.py"; exit 1; }
rec="$work/gen/good.edf"
stages="$work/stages.csv"
cp "$src/tests/malformed/good-stages.csv" "$stages"
fails=0
ok() { echo "ok   $1"; }
bad() { echo "FAIL $1"; fails=$((fails + 1)); }
run() { # run NAME WANT_EXIT ARGS...: runs remtone, keeps stdout/stderr in $work/out, $work/err
  local name=$1 want=$2; shift 2
  "$bin" "$@" >"$work/out" 2>"$work/err" </dev/null
  local got=$?
  if [ "$got" = "$want" ]; then ok "$name"; else bad "$name: exit $got, want $want"; sed 's/^/    /' "$work/err" | head -4; fi
}
has_err() { if grep -qF -- "$2" "$work/err"; then ok "$1"; else bad "$1: '$2' not in: $(head -2 "$work/err")"; fi; }
no_temp() { # no_temp NAME DIR: no PATH.tmp-XXXXXX left in DIR
  local left; left=$(find "$2" -maxdepth 1 -name '*.tmp-*' | head -3)
  if [ -z "$left" ]; then ok "$1"; else bad "$1: left $left"; fi
}
sum() { sha256sum "$1" | cut -d' ' -f1; }

# 1. a run that succeeds leaves its files and nothing else
out="$work/out1"; mkdir -p "$out"
run score-writes 0 score "$rec" --stages "$stages" --quiet --json "$out/r.json" --html "$out/r.html" --minis "$out/m.csv"
[ -s "$out/r.json" ] && [ -s "$out/r.html" ] && [ -s "$out/m.csv" ] && ok outputs-exist || bad "outputs-exist"
no_temp no-temp-after-success "$out"

# 2. an output that is an input is refused before anything is written
rec_sum=$(sum "$rec"); stages_sum=$(sum "$stages")
run json-over-recording 2 score "$rec" --stages "$stages" --json "$rec"
has_err json-over-recording-message "refusing to overwrite an input"
run html-over-stages 2 score "$rec" --stages "$stages" --html "$stages"
ln -sf "$rec" "$work/link.edf"; ln -f "$stages" "$work/hard.csv"
run minis-over-symlinked-recording 2 score "$rec" --stages "$stages" --minis "$work/link.edf"
run json-over-hardlinked-stages 2 score "$rec" --stages "$stages" --json "$work/hard.csv"
run scan-json-over-recording 2 scan "$rec" --json "$work/gen/../gen/good.edf"
has_err scan-json-over-recording-message "refusing to overwrite an input"
[ "$(sum "$rec")" = "$rec_sum" ] && [ "$(sum "$stages")" = "$stages_sum" ] && ok inputs-untouched || bad inputs-untouched
[ -s "$work/out" ] && bad "refused-run-printed-a-result" || ok refused-run-prints-nothing

# 3. no space left: /dev/full is written in place (a device cannot be renamed
# over) and every write fails with ENOSPC
run json-to-dev-full 7 score "$rec" --stages "$stages" --quiet --json /dev/full
has_err json-to-dev-full-message "/dev/full"
[ -c /dev/full ] && ok dev-full-still-a-device || bad "dev-full-still-a-device"
no_temp no-temp-in-dev /dev
run scan-json-to-dev-full 7 scan "$rec" --json /dev/full

# 4. a folder that does not exist, and a folder given as the output file
run json-into-missing-folder 7 score "$rec" --stages "$stages" --quiet --json "$work/no/such/r.json"
[ ! -e "$work/no" ] && ok missing-folder-not-made || bad missing-folder-not-made
mkdir -p "$work/adir"
run json-onto-directory 7 score "$rec" --stages "$stages" --quiet --json "$work/adir"
no_temp no-temp-beside-directory "$work"

# 5. a full file system: a 16 KiB tmpfs holding a previous result; the new
# HTML report (tens of KiB) cannot fit. Needs root and a kernel that lets
# this container mount; otherwise said and skipped (cases 3 covers ENOSPC).
mkdir -p "$mnt"
if [ "$(id -u)" = 0 ] && mount -t tmpfs -o size=16k tmpfs "$mnt" 2>/dev/null; then
  echo "previous report" >"$mnt/r.html"
  run html-to-full-fs 7 score "$rec" --stages "$stages" --quiet --html "$mnt/r.html"
  has_err html-to-full-fs-message "cannot write"
  [ "$(cat "$mnt/r.html")" = "previous report" ] && ok full-fs-keeps-previous || bad full-fs-keeps-previous
  no_temp full-fs-no-temp "$mnt"
  umount "$mnt"
else
  echo "skip full-fs: cannot mount a tmpfs here (needs root and mount rights)"
fi

# 6. SIGKILL in the middle of a long write keeps the previous file: synth
# writes a 12-h night (hundreds of MiB) through night.edf.tmp-XXXXXX
night="$work/night"
run synth-previous 0 synth --profile rbd --hours 1 --seed 5 --out "$night"
prev=$(sum "$night/night.edf")
"$bin" synth --profile rbd --hours 12 --seed 6 --out "$night" >/dev/null 2>&1 &
pid=$!
for _ in $(seq 1 600); do
  ls "$night"/night.edf.tmp-* >/dev/null 2>&1 && break
  kill -0 "$pid" 2>/dev/null || break
  sleep 0.05
done
if ls "$night"/night.edf.tmp-* >/dev/null 2>&1; then
  sleep 0.3
  kill -9 "$pid" 2>/dev/null; wait "$pid" 2>/dev/null
  [ "$(sum "$night/night.edf")" = "$prev" ] && ok killed-write-keeps-previous || bad killed-write-keeps-previous
  run killed-write-previous-still-reads 0 scan "$night/night.edf"
  rm -f "$night"/*.tmp-*
else
  wait "$pid" 2>/dev/null
  bad "killed-write: the 12-h write ended before it could be interrupted"
fi

# 7. the EDF+ annotation file goes through EDFlib's writer, which does not
# report failed writes: remtone reads the file back before renaming it. A
# device gets a private temporary file (in TMPDIR) that is copied, then removed.
# (A night of its own: case 6 may have left the 12-h tables beside night.edf.)
night="$work/night7"
run synth-for-annotations 0 synth --profile rbd --hours 1 --seed 5 --out "$night"
nstages="$night/stages.csv"
mkdir -p "$work/tmpdir"
TMPDIR="$work/tmpdir" run annotations-to-dev-full 7 score "$night/night.edf" --stages "$nstages" --quiet --annotations /dev/full
has_err annotations-to-dev-full-message "/dev/full: cannot write output"
[ -z "$(ls -A "$work/tmpdir")" ] && ok annotations-private-temp-removed || bad annotations-private-temp-removed
run annotations-to-dev-null 0 score "$night/night.edf" --stages "$nstages" --quiet --annotations /dev/null
if [ "$(id -u)" = 0 ] && mount -t tmpfs -o size=16k tmpfs "$mnt" 2>/dev/null; then
  echo "previous annotations" >"$mnt/a.edf"
  run annotations-to-full-fs 7 score "$night/night.edf" --stages "$nstages" --quiet --annotations "$mnt/a.edf"
  has_err annotations-to-full-fs-message "cannot write output"
  [ "$(cat "$mnt/a.edf")" = "previous annotations" ] && ok annotations-full-fs-keeps-previous || bad annotations-full-fs-keeps-previous
  no_temp annotations-full-fs-no-temp "$mnt"
  umount "$mnt"
else
  echo "skip annotations-full-fs: cannot mount a tmpfs here (needs root and mount rights)"
fi

echo "$fails failed"
[ "$fails" = 0 ]
