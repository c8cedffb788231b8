#!/usr/bin/env bash
# Cohort runs (docs/cohort.md): a small cohort of 1-hour synthetic nights
# (3 rbd cases, 3 typical-older controls) scored whole, killed and resumed,
# split into parts and merged, with manifest errors and a failing night.
# Expected facts: results are identical however the run was split or
# interrupted (the design of the runner); the synthetic profiles are built
# to fall on either side of the published cutoffs (docs/synthetic-nights.md),
# so the cohort separates perfectly (AUC near 1).
set -u
bin=${REMTONE_BIN:?}
py=/usr/bin/python3
work="${REMTONE_TMP:-/tmp}/cohort"
rm -rf "$work" && mkdir -p "$work"
fails=0
ok() { echo "ok   $1"; }
bad() { echo "FAIL $1"; fails=$((fails+1)); }
expect() { # expect NAME EXIT CMD... (stderr kept in $work/err)
  local name=$1 want=$2; shift 2
  "$@" >"$work/out" 2>"$work/err"; local got=$?
  if [ "$got" = "$want" ]; then ok "$name"; else bad "$name: exit $got, want $want"; sed 's/^/    /' "$work/err" | head -5; fi
}
has() { if grep -qF -- "$3" "$2"; then ok "$1"; else bad "$1: '$3' not in $2"; sed 's/^/    /' "$2" | head -3; fi; }

# ---- the cohort
cd "$work" && mkdir -p data
for i in 1 2 3; do "$bin" synth --profile rbd --hours 1 --seed $i --out "data/r$i" >/dev/null || bad "synth r$i"; done
for i in 4 5 6; do "$bin" synth --profile typical-older --hours 1 --seed $i --out "data/t$i" >/dev/null || bad "synth t$i"; done
{
  echo "id,recording,stages,events,group"
  for i in 1 2 3; do echo "r$i,r$i/night.edf,r$i/stages.csv,r$i/events.csv,case"; done
  for i in 4 5 6; do echo "t$i,t$i/night.edf,t$i/stages.csv,,control"; done
} > data/manifest.csv
ids="r1 r2 r3 t4 t5 t6"
no_temporaries() { # no_temporaries NAME DIR
  if ls -a "$2/nights" | grep -q '\.tmp-'; then bad "$1: temporary files left: $(ls -a "$2/nights" | grep '\.tmp-')"; else ok "$1"; fi
}
scored_once() { # scored_once NAME DIR: every id has exactly one "scored" line in the log
  local id n bad_ids=""
  for id in $ids; do n=$(grep -cx "scored $id" "$2/cohort.log"); [ "$n" = 1 ] || bad_ids="$bad_ids $id:$n"; done
  if [ -z "$bad_ids" ]; then ok "$1"; else bad "$1: scored counts$bad_ids"; fi
}

# ---- uninterrupted reference run
expect whole-run 0 "$bin" cohort data/manifest.csv --out ref --jobs 2
has whole-summary "$work/out" "6 scored"
for f in cohort.csv calibration.csv calibrated-cutoffs.csv cohort.html; do
  [ -s "ref/$f" ] && ok "ref-$f" || bad "ref-$f missing"
done
scored_once ref-scored-once ref
# cohort.csv columns of docs/cohort.md ("Files"), index columns in rule-table order
expect table-shape 0 "$py" -c '
import csv,sys
rows=list(csv.DictReader(open(sys.argv[1])))
h=list(rows[0].keys())
assert h[:7]==["id","group","flagged","level","reservations","rem_minutes","scorable_minutes"], h
assert "sinbar.chin_any_fds_phasic_3s" in h and "rai" in h and "warnings" in h
assert [r["id"] for r in rows]==["r1","r2","r3","t4","t5","t6"]
assert all(r["flagged"]=="true" for r in rows[:3]) and all(r["group"]=="control" for r in rows[3:])' ref/cohort.csv
# Frauscher 2012 combined SINBAR index and Ferri 2010 RAI: the synthetic
# cases and controls lie on either side, so the area is 1 (allow 0.95)
expect auc-near-one 0 "$py" -c '
import csv,sys
c={r["index"]:r for r in csv.DictReader(open(sys.argv[1]))}
for ix in ("sinbar.chin_any_fds_phasic_3s","rai"):
    assert float(c[ix]["auc"])>=0.95, (ix, c[ix]["auc"])
    assert int(c[ix]["n_positive"])==3 and int(c[ix]["n_negative"])==3
# at the published cutoff every case is flagged and no control
assert float(c["sinbar.chin_any_fds_phasic_3s"]["sensitivity_at_published"])==1.0
assert float(c["sinbar.chin_any_fds_phasic_3s"]["specificity_at_published"])==1.0
assert c["rai"]["abnormal"]=="below"' ref/calibration.csv
# the calibrated cutoffs load in `remtone score --cutoffs` (rt_cutoffs_load)
expect calibrated-cutoffs-load 0 "$bin" score data/r1/night.edf --stages data/r1/stages.csv --cutoffs ref/calibrated-cutoffs.csv --quiet
has html-svg ref/cohort.html "<svg"
has html-roc ref/cohort.html "<polyline"
if grep -qi "<script" ref/cohort.html; then bad "html-no-script"; else ok "html-no-script"; fi

# ---- a rerun is idempotent: nothing rescored, same table
cp ref/cohort.csv "$work/ref.csv"
expect rerun 0 "$bin" cohort data/manifest.csv --out ref --jobs 2
has rerun-skips "$work/out" "0 scored, 6 already current"
scored_once rerun-scored-once ref
cmp -s ref/cohort.csv "$work/ref.csv" && ok rerun-same-table || bad rerun-same-table
# a changed input is rescored, and only that one
cp data/t6/stages.csv data/t6/stages.orig && echo "" >> data/t6/stages.csv
expect changed-input 0 "$bin" cohort data/manifest.csv --out ref --jobs 2
has changed-rescored "$work/out" "1 scored, 5 already current"
cp data/t6/stages.orig data/t6/stages.csv
"$bin" cohort data/manifest.csv --out ref --jobs 2 --quiet
expect force 0 "$bin" cohort data/manifest.csv --out ref --jobs 2 --force
has force-rescores "$work/out" "6 scored"

# ---- killed mid-way, then resumed
"$bin" cohort data/manifest.csv --out killed --jobs 1 --quiet >/dev/null 2>&1 &
pid=$!
for _ in $(seq 1 2000); do
  n=$(ls killed/nights 2>/dev/null | grep -c '\.key$')
  [ "$n" -ge 1 ] && break
  kill -0 $pid 2>/dev/null || break
  sleep 0.01
done
kill -9 $pid 2>/dev/null
wait $pid 2>/dev/null
before=$(ls killed/nights | grep -c '\.key$')
if [ "$before" -ge 1 ] && [ "$before" -lt 6 ]; then ok "killed-after-$before"; else bad "kill came at $before results (want 1-5)"; fi
ls killed/nights | grep '\.key$' | sed 's/\.key$//' > "$work/done-before"
for id in $(cat "$work/done-before"); do stat -c %Y.%y "killed/nights/$id.json"; done > "$work/mtimes-before"
expect resume 0 "$bin" cohort data/manifest.csv --out killed --jobs 1
has resume-skips "$work/out" "$before already current"
scored_once resumed-scored-once killed
for id in $(cat "$work/done-before"); do stat -c %Y.%y "killed/nights/$id.json"; done > "$work/mtimes-after"
cmp -s "$work/mtimes-before" "$work/mtimes-after" && ok resume-kept-results || bad "resume rewrote results scored before the kill"
no_temporaries resume-no-temporaries killed
cmp -s killed/cohort.csv ref/cohort.csv && ok resume-same-table || bad "resumed cohort.csv differs from the uninterrupted run"

# ---- parts: disjoint, covering, merged equal to a single run
for k in 1 2 3; do expect part-$k 0 "$bin" cohort data/manifest.csv --out parts --jobs 1 --part $k/3; done
[ ! -e parts/cohort.csv ] && ok parts-no-table-before-merge || bad parts-no-table-before-merge
scored_once parts-disjoint-covering parts
expect merge 0 "$bin" cohort-merge parts
cmp -s parts/cohort.csv ref/cohort.csv && ok merge-same-table || bad "merged cohort.csv differs from the single run"
cmp -s parts/calibration.csv ref/calibration.csv && ok merge-same-calibration || bad merge-same-calibration
no_temporaries parts-no-temporaries parts
expect bad-part 2 "$bin" cohort data/manifest.csv --out parts --part 4/3
expect bad-part-syntax 2 "$bin" cohort data/manifest.csv --out parts --part 1of3

# ---- manifest errors name the row
printf 'id,recording,stages,events,group\nr1,r1/night.edf,r1/stages.csv,,case\nr9,r9/night.edf,r9/stages.csv,,case\n' > data/missing.csv
expect missing-file 3 "$bin" cohort data/missing.csv --out bad
has missing-names-row "$work/err" "line 3 (night r9): recording"
printf 'id,recording,stages,events,group\nr1,r1/night.edf,r1/stages.csv,,case\nR1,r2/night.edf,r2/stages.csv,,case\n' > data/dup.csv
expect duplicate-id 5 "$bin" cohort data/dup.csv --out bad
has duplicate-names-row "$work/err" "line 3: duplicate id 'R1' (first on line 2"
printf 'id,recording,stages,events,group\nr1,r1/night.edf,r1/stages.csv,,case\nr2,r2/night.edf\n' > data/short.csv
expect malformed-row 5 "$bin" cohort data/short.csv --out bad
has malformed-names-row "$work/err" "line 3"
printf 'id,recording,stages,events,group\n../evil,r1/night.edf,r1/stages.csv,,case\n' > data/unsafe.csv
expect unsafe-id 5 "$bin" cohort data/unsafe.csv --out bad
has unsafe-names-row "$work/err" "line 2: id '../evil' is not a safe file name"
[ ! -e bad/nights ] && ok manifest-errors-write-nothing || bad manifest-errors-write-nothing

# ---- a failing night is recorded and does not stop the run; two rows on one
# recording are never opened at once (EDFlib refuses a second open)
printf 'id,recording,stages,events,group\nr1,r1/night.edf,r1/stages.csv,,case\nbroken,r1/stages.csv,r1/stages.csv,,case\nr1b,r1/night.edf,r1/stages.csv,,other\nr1c,r1/night.edf,r1/stages.csv,,other\n' > data/mixed.csv
expect failing-night 0 "$bin" cohort data/mixed.csv --out mixed --jobs 2
has failing-counted "$work/out" "3 scored, 0 already current, 1 failed"
[ -s mixed/nights/broken.error.json ] && ok error-record || bad error-record
expect error-record-shape 0 "$py" -c '
import json,sys; d=json.load(open(sys.argv[1]))
assert d["id"]=="broken" and d["status"]=="recording" and d["exit_code"]==4 and "stages.csv" in d["message"]' mixed/nights/broken.error.json
has failed-row mixed/cohort.csv "broken,case,,failed,,"
expect help 0 "$bin" cohort --help

# ---- optional age and sex columns: the night's indices placed against the norms (docs/cohort.md);
# a changed age scores the night again, an unchanged manifest does not
printf 'id,recording,stages,events,group,age,sex\nr1,r1/night.edf,r1/stages.csv,,case,70,M\n' > data/aged.csv
expect aged-run 0 "$bin" cohort data/aged.csv --out aged --jobs 1
expect aged-norms 0 "$py" -c '
import json,sys; d=json.load(open(sys.argv[1])); n=d["norms"]
assert n["age_years"]==70 and n["sex"]=="M" and n["decides_level"] is False, n
assert n["indices"]["sinbar.chin_any_3s"]["band"] in ("within","beyond-normal-limit","beyond-rbd-cutoff")' aged/nights/r1.json
expect aged-rerun 0 "$bin" cohort data/aged.csv --out aged --jobs 1
has aged-kept "$work/out" "0 scored"
sed -i 's/,70,M/,50,M/' data/aged.csv
expect aged-changed 0 "$bin" cohort data/aged.csv --out aged --jobs 1
has aged-rescored "$work/out" "1 scored"

echo "$fails failure(s)"
[ "$fails" = 0 ]
