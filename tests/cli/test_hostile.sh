#!/usr/bin/env bash
# Hostile inputs beyond the malformed corpus (docs/hardening.md, "Classes of
# hostile input"): text that is not UTF-8 on its way to JSON, CSV and HTML;
# outputs over inputs and over each other; channel labels that differ only in
# case or repeat; implausible physical ranges; indices over empty
# denominators; inputs that are pipes. Recordings are written here with tests/malformed/edf_writer.py.
. "${REMTONE_SOURCE:?}/tests/cli/checks.sh" hostile
stages=$src/tests/malformed/good-stages.csv
live='[("Chin1-Chin2", "live", (-500.0, 500.0))]'

# ---- 1. text that is not UTF-8 reaches JSON, CSV and HTML escaped, never dropped
edf good.edf "$live" || bad "write good.edf"
edf bad-stage.edf "$live" '[(0, 30, b"Sleep stage W"), (30, 30, b"Sleep stage R\xff\xfe")]' || bad "write bad-stage.edf"
mkdir -p c && cp bad-stage.edf good.edf c/
printf 'id,recording,stages,events,group\nbad,bad-stage.edf,,,case\ngood,good.edf,%s,,control\n' "$stages" > c/manifest.csv
expect utf8-cohort-runs 0 "$bin" cohort c/manifest.csv --out c/out --jobs 1
has utf8-cohort-counts "$work/out" "2 nights in cohort.csv (1 scored, 1 failed)"
[ -s c/out/nights/bad.error.json ] && ok utf8-error-record || bad "utf8-error-record: no nights/bad.error.json"
expect utf8-cohort-row 0 "$py" -c '
import csv, json, sys
rows = {r["id"]: r for r in csv.DictReader(open(sys.argv[1], encoding="utf-8"))}
assert rows["bad"]["level"] == "failed" and "\ufffd" in rows["bad"]["error"], rows
e = json.load(open(sys.argv[2], encoding="utf-8"))
assert "\ufffd" in e["message"] and e["exit_code"] == 5, e' c/out/cohort.csv c/out/nights/bad.error.json
# a path with a byte that is not UTF-8 stays in the provenance, escaped
edf "odd-$(printf '\xe9').edf" "$live" || bad "write odd path"
expect utf8-path-score 0 "$bin" score "odd-$(printf '\xe9').edf" --stages "$stages" --quiet --json odd.json --html odd.html --minis odd.csv
expect utf8-path-kept 0 "$py" -c '
import json, sys
d = json.load(open(sys.argv[1], encoding="utf-8"))
assert d["provenance"]["inputs"]["recording"]["path"] == "odd-\ufffd.edf", d["provenance"]["inputs"]
open(sys.argv[2], encoding="utf-8").read(); open(sys.argv[3], encoding="utf-8").read()' odd.json odd.html odd.csv

# ---- 2. a cohort never writes over its own inputs (the manifest, the cutoffs)
mkdir -p m && cp c/good.edf m/ && printf 'id,recording,stages,events,group\ngood,good.edf,%s,,control\n' "$stages" > m/cohort.csv
cp m/cohort.csv m/cohort.csv.orig
expect cohort-manifest-as-output 2 "$bin" cohort m/cohort.csv --out m --jobs 1
has cohort-manifest-named "$work/err" "is the input file"
cmp -s m/cohort.csv m/cohort.csv.orig && ok cohort-manifest-kept || bad "cohort-manifest-kept: the manifest was replaced"
printf 'index,cutoff\nrai,0.8\n' > c/out/calibrated-cutoffs.csv && cp c/out/calibrated-cutoffs.csv cut.orig
expect cohort-cutoffs-as-output 2 "$bin" cohort c/manifest.csv --out c/out --cutoffs c/out/calibrated-cutoffs.csv --jobs 1
cmp -s c/out/calibrated-cutoffs.csv cut.orig && ok cohort-cutoffs-kept || bad "cohort-cutoffs-kept: the cutoffs were replaced"
expect merge-cutoffs-as-output 2 "$bin" cohort-merge c/out --cutoffs c/out/calibrated-cutoffs.csv
cmp -s c/out/calibrated-cutoffs.csv cut.orig && ok merge-cutoffs-kept || bad "merge-cutoffs-kept: the cutoffs were replaced"

# ---- 3. two outputs of one command never share a destination
expect outputs-same-file 2 "$bin" score good.edf --stages "$stages" --json same.out --html same.out
has outputs-same-file-named "$work/err" "--json same.out and --html same.out"
[ -e same.out ] && bad "outputs-same-file: same.out written" || ok outputs-same-file-nothing-written
expect outputs-same-file-spelled 2 "$bin" score good.edf --stages "$stages" --minis ./x.csv --annotations ../hostile/x.csv
expect outputs-both-stdout 2 "$bin" score good.edf --stages "$stages" --json - --html -
has outputs-both-stdout-named "$work/err" "--json - and --html -"
[ -s "$work/out" ] && bad "outputs-both-stdout: printed a result" || ok outputs-both-stdout-silent
touch exists.json && ln -sf exists.json link.json
expect outputs-same-file-link 2 "$bin" score good.edf --stages "$stages" --json exists.json --minis link.json
expect outputs-devices-allowed 0 "$bin" score good.edf --stages "$stages" --quiet --json /dev/null --html /dev/null

# ---- 4. a role option takes the channel it names, or none
edf case.edf '[("Chin", "flat", (-500.0, 500.0)), ("CHIN", "live", (-500.0, 500.0))]' || bad "write case.edf"
expect chin-exact-label 0 "$bin" score case.edf --stages "$stages" --quiet --chin CHIN --json case.json
expect chin-exact-label-taken 0 "$py" -c '
import json, sys
c = json.load(open(sys.argv[1]))["channels"]
chin = [x for x in c if x["role"] == "chin"][0]
assert chin["label"] == "CHIN" and chin["rem_median_uv"] > 0, chin' case.json
expect chin-case-ambiguous 6 "$bin" score case.edf --stages "$stages" --quiet --chin chin
has chin-case-ambiguous-says "$work/err" "--chin '#"
edf dup.edf '[("Chin", "flat", (-500.0, 500.0)), ("Chin", "live", (-500.0, 500.0))]' || bad "write dup.edf"
expect chin-dup-detected 6 "$bin" score dup.edf --stages "$stages" --quiet
has chin-dup-suggests-number "$work/err" "--chin '#1'"
expect chin-dup-label 6 "$bin" score dup.edf --stages "$stages" --quiet --chin Chin
has chin-dup-label-suggests-number "$work/err" "--chin '#2'"
expect chin-by-number 0 "$bin" score dup.edf --stages "$stages" --quiet --chin '#2' --json dup.json
expect chin-by-number-taken 0 "$py" -c '
import json, sys
c = json.load(open(sys.argv[1]))["channels"]
chin = [x for x in c if x["role"] == "chin"][0]
assert chin["label"] == "Chin" and chin["rem_median_uv"] > 0, chin' dup.json
expect chin-help 0 "$bin" score --help
has chin-help-number "$work/out" "'#N'"

# ---- 5. an input that is not a regular file (a pipe: bash process substitution)
# is refused, never read as empty, and never digested as something nobody read
expect pipe-stages 3 "$bin" score good.edf --stages <(cat "$stages") --quiet
has pipe-stages-says "$work/err" "not a regular file (a pipe, process substitution or device)"
has pipe-stages-advice "$work/err" "save it to a file first"
hasnt pipe-stages-not-empty "$work/err" "empty"
printf 'start_s,duration_s,type\n200,10,arousal\n' > events.csv
expect pipe-events 3 "$bin" score good.edf --stages "$stages" --events <(cat events.csv) --quiet --json pipe.json
has pipe-events-says "$work/err" "not a regular file"
[ -e pipe.json ] && bad "pipe-events: pipe.json written" || ok pipe-events-nothing-written
expect pipe-cutoffs 3 "$bin" score good.edf --stages "$stages" --cutoffs <(printf 'index,cutoff\nrai,0.8\n') --quiet
expect pipe-manifest 3 "$bin" cohort <(cat c/manifest.csv) --out pipe-out --jobs 1
# the same inputs as files: the provenance describes exactly the bytes given
expect file-events 0 "$bin" score good.edf --stages "$stages" --events events.csv --quiet --json file.json
expect file-provenance 0 "$py" -c '
import json, os, sys
p = json.load(open(sys.argv[1]))["provenance"]["inputs"]
for key, path in (("stages", sys.argv[2]), ("events", sys.argv[3])):
    assert p[key]["bytes"] == os.path.getsize(path) > 0, (key, p[key])' file.json "$stages" events.csv

# ---- 6. exit classes (README.md, "Exit codes"): output problems are 7, not usage (2)
mkdir -p busy
printf 'id,recording,stages,events,group\ngood,../good.edf,%s,,control\n' "$stages" > busy/m.csv
if command -v flock >/dev/null; then
  mkdir -p busy/out && : > busy/out/.run.lock
  # another run holds the folder (flock(1), util-linux, takes the same lock)
  expect cohort-folder-busy 7 flock busy/out/.run.lock "$bin" cohort busy/m.csv --out busy/out --jobs 1
  has cohort-folder-busy-says "$work/err" "another cohort run is writing this folder"
else
  echo "skip cohort-folder-busy: no flock(1) here"
fi
long=$(printf 'x%.0s' $(seq 1 4100))
expect output-path-too-long 7 "$bin" score good.edf --stages "$stages" --quiet --json "$long.json"
has output-path-too-long-says "$work/err" "the path is too long"
expect cohort-out-too-long 7 "$bin" cohort busy/m.csv --out "busy/${long:0:4000}" --jobs 1
has cohort-out-too-long-says "$work/err" "the folder's path is too long"
expect merge-no-results 3 "$bin" cohort-merge busy/none
has merge-no-results-says "$work/err" "no cohort results here"
expect cohort-cutoffs-missing 3 "$bin" cohort busy/m.csv --out busy/o2 --cutoffs busy/none.csv --jobs 1
[ -e busy/o2 ] && bad "cohort-cutoffs-missing: busy/o2 made" || ok cohort-cutoffs-missing-nothing-made
# a damaged result is rescored on the next run, never taken as current
expect cohort-first 0 "$bin" cohort busy/m.csv --out busy/r --jobs 1
head -c 200 busy/r/nights/good.json > cut && mv cut busy/r/nights/good.json
expect cohort-damaged-rescored 0 "$bin" cohort busy/m.csv --out busy/r --jobs 1
has cohort-damaged-rescored-counts "$work/out" "1 nights: 1 scored, 0 already current, 0 failed"
expect cohort-damaged-result-whole 0 "$py" -c '
import json, sys
assert json.load(open(sys.argv[1]))["schema"] == "remtone-night/4"' busy/r/nights/good.json

# ---- 7. a cohort short of address space ends as out of memory (exit 8 with a
# message, nothing but the lock file left) or records the night as failed with
# exit code 8; never an abort (FFTW's allocator asserted: exit 134) or exit 9.
# The limits sweep the places memory runs out: loading, threads, FFTW, scoring.
# AddressSanitizer reserves terabytes of address space at start, so the sweep
# runs in the ordinary build only.
limits="40000 45000 50000 55000 60000 65000 70000 80000 100000"
if ldd "$bin" 2>/dev/null | grep -q libasan; then
  echo "skip cohort-ulimit-*: AddressSanitizer cannot start under a low ulimit -v"; limits=
else
  expect synth-low-memory 0 "$bin" synth --profile rbd --hours 1 --seed 5 --out lowmem
  printf 'id,recording,stages,events,group\nn,night.edf,stages.csv,,case\n' > lowmem/m.csv
fi
for limit in $limits; do
  rm -rf lowmem/out
  (ulimit -v $limit; exec "$bin" cohort lowmem/m.csv --out lowmem/out --jobs 2 --threads 2) \
    >"$work/out" 2>"$work/err"
  rc=$?
  name="cohort-ulimit-$limit"
  case $rc in
    # the record's message names the recording (README.md: messages name the file)
    0) if [ -e lowmem/out/nights/n.json ] || { grep -q '"exit_code": 8' lowmem/out/nights/n.error.json &&
         grep -q '"message": "lowmem/night.edf: ' lowmem/out/nights/n.error.json; } 2>/dev/null
       then ok "$name (exit 0)"; else bad "$name: exit 0 without a result or an exit-8 error record naming lowmem/night.edf"; fi ;;
    8) if grep -q "out of memory" "$work/err" && [ -z "$(find lowmem/out -type f ! -name .run.lock 2>/dev/null)" ]
       then ok "$name (exit 8)"; else bad "$name: exit 8 without the message, or files left"; fi ;;
    127) echo "skip $name: the program cannot even load within $limit KiB" ;;
    *) bad "$name: exit $rc"; sed 's/^/    /' "$work/err" | head -3 ;;
  esac
done

# ---- 8. EMG sampled outside the rates remtone scores (200 to 65536 Hz) is
# refused naming the file, the channel and the range, never met by a
# band-pass message the user cannot act on; both ends are scored
"$py" - "$src/tests/malformed" <<'PY' || bad "write rate recordings"
import random, sys
sys.path.insert(0, sys.argv[1])
import edf_writer as ew
rng = random.Random(7)
noise = [rng.randint(-300, 300) for _ in range(4096)]
for rate in (199, 200, 65536, 65537):   # samples in each 1-s record
    chin = ew.Signal("Chin1-Chin2", rate, phys=(-500.0, 500.0), value=lambda r, i: noise[(r * 7 + i) % 4096])
    open("rate-%d.edf" % rate, "wb").write(ew.edf_bytes([chin], 60, plus=True, annotations=[(0, None, "Lights off")]))
PY
printf 'start_s,duration_s,stage\n0,30,W\n30,30,R\n' > stages-60s.csv
for rate in 199 65537; do
  expect "rate-$rate-refused" 6 "$bin" score "rate-$rate.edf" --stages stages-60s.csv --quiet
  has "rate-$rate-says" "$work/err" "rate-$rate.edf: channel \"Chin1-Chin2\" (chin, signal 1) is sampled at $rate Hz; remtone scores EMG sampled at 200 to 65536 Hz"
done
for rate in 200 65536; do
  expect "rate-$rate-scored" 0 "$bin" score "rate-$rate.edf" --stages stages-60s.csv --quiet
done
rm -f rate-*.edf
# scan reads in chunks of at most 2^21 samples, so 5.5 minutes at 65536 Hz
# scan within 200 MB of address space (5-minute chunks had needed 620 MB:
# exit 8); the ordinary build only, as in section 7
if [ -n "$limits" ]; then
  "$py" - "$src/tests/malformed" <<'PY' || bad "write scan-65536.edf"
import random, sys
sys.path.insert(0, sys.argv[1])
import edf_writer as ew
rng = random.Random(7)
noise = [rng.randint(-300, 300) for _ in range(4096)]
chin = ew.Signal("Chin1-Chin2", 65536, phys=(-500.0, 500.0), value=lambda r, i: noise[(r * 7 + i) % 4096])
open("scan-65536.edf", "wb").write(ew.edf_bytes([chin], 330, plus=True, annotations=[(0, None, "Lights off")]))
PY
  expect scan-memory-bounded 0 bash -c 'ulimit -v 200000; exec "$0" scan scan-65536.edf' "$bin"
  rm -f scan-65536.edf
fi

finish
