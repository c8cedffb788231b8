#!/usr/bin/env bash
# Threads change the time a night takes, never its result: the same night
# scored with --threads 1, 2 and 4 gives byte-identical outputs (the JSON with
# its run time normalised, the text summary, the mini-epoch audit table and
# the EDF+ annotations), and a cohort gives the same night files whatever its
# jobs and threads. The night has what the scorer merges from several items:
# bursts on every channel, ECG found and vetoed, a mains line, electrode pops
# and clipping (quality marks), and respiratory events (exclusions).
set -u
bin=${REMTONE_BIN:?}
work="${REMTONE_TMP:-/tmp}/threads"
rm -rf "$work" && mkdir -p "$work"
fails=0
ok() { echo "ok   $1"; }
bad() { echo "FAIL $1"; fails=$((fails+1)); }
expect() { # expect NAME EXIT CMD...
  local name=$1 want=$2; shift 2
  "$@" >"$work/out" 2>"$work/err"; local got=$?
  if [ "$got" = "$want" ]; then ok "$name"; else bad "$name: exit $got, want $want"; sed 's/^/    /' "$work/err" | head -5; fi
}
# the run time is the one field that may differ between two runs
normalised() { sed 's/^\(    "run_at": \)"[^"]*"/\1"(normalised)"/' "$1"; }
same() { # same NAME FILE1 FILE2
  if cmp -s "$2" "$3"; then ok "$1"; else bad "$1: $2 and $3 differ"; diff "$2" "$3" | head -10 | sed 's/^/    /'; fi
}

cd "$work"
expect synth 0 "$bin" synth --profile apnea --hours 1 --seed 21 --out n --mains 60:20:2 \
  --ecg-bleed 25:6 --pops 10 --clip 3000:5 --short-bursts --single-epoch-bouts 2
expect threads-zero 2 "$bin" score n/night.edf --stages n/stages.csv --threads 0
expect threads-word 2 "$bin" score n/night.edf --stages n/stages.csv --threads two
for t in 1 2 4; do
  expect "score-threads-$t" 0 "$bin" score n/night.edf --stages n/stages.csv --events n/events.csv \
    --threads $t --json "t$t.json" --minis "t$t.csv" --annotations "t$t.edf"
  cp "$work/out" "t$t.txt"
  normalised "t$t.json" > "t$t.norm.json"
done
grep -q '"run_at": "(normalised)"' t1.norm.json && ok run-at-normalised || bad "run-at-normalised: field not found"
for t in 2 4; do
  for f in norm.json txt csv edf; do same "threads-1-vs-$t-$f" "t1.$f" "t$t.$f"; done
done

# a cohort: two nights, scored with one job and one thread, then two jobs of three threads
"$bin" synth --profile rbd --hours 1 --seed 22 --out m >/dev/null || bad "synth m"
{
  echo "id,recording,stages,events,group"
  echo "n,n/night.edf,n/stages.csv,n/events.csv,case"
  echo "m,m/night.edf,m/stages.csv,m/events.csv,control"
} > manifest.csv
expect cohort-threads-zero 2 "$bin" cohort manifest.csv --out bad --threads 0
expect cohort-1x1 0 "$bin" cohort manifest.csv --out c1 --jobs 1 --threads 1 --quiet
expect cohort-2x3 0 "$bin" cohort manifest.csv --out c2 --jobs 2 --threads 3 --quiet
expect cohort-default 0 "$bin" cohort manifest.csv --out c3 --quiet
for id in n m; do
  for d in c2 c3; do
    normalised "c1/nights/$id.json" > "c1.$id.json"
    normalised "$d/nights/$id.json" > "$d.$id.json"
    same "cohort-$id-c1-vs-$d" "c1.$id.json" "$d.$id.json"
    same "cohort-$id-key-c1-vs-$d" "c1/nights/$id.key" "$d/nights/$id.key"
  done
done
# the threads do not enter a night's identity: a rerun with other threads rescores nothing
expect cohort-rerun 0 "$bin" cohort manifest.csv --out c1 --jobs 1 --threads 2
if grep -q "0 scored, 2 already current" "$work/out"; then ok cohort-rerun-current
else bad "cohort-rerun-current: $(cat "$work/out")"; fi

echo "$fails failed"
[ "$fails" = 0 ]
