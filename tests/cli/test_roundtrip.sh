#!/usr/bin/env bash
# Every file remtone writes is one remtone (or the library it reads with) can
# read back (docs/hardening.md, "Classes of hostile input"): the night JSON,
# the mini-epoch audit table, the EDF+ annotation file, cohort.csv and the
# calibrated cutoffs, each also in its empty case -- a night without REM, a
# cohort of one group.
. "${REMTONE_SOURCE:?}/tests/cli/checks.sh" roundtrip
tools=${REMTONE_TOOLS:?}

# two 5-minute nights, one chin channel of noise: a quiet one and one ten
# times louder, so that a cohort of both has something to calibrate on
edf quiet.edf '[("Chin1-Chin2", "live", (-500.0, 500.0))]' || bad "write quiet.edf"
edf loud.edf '[("Chin1-Chin2", "loud", (-500.0, 500.0))]' || bad "write loud.edf"
stages=$src/tests/malformed/good-stages.csv
printf 'start_s,duration_s,stage\n0,60,W\n60,240,N2\n' > stages-norem.csv

for case in rem norem; do
  # the loud night has activity in REM to annotate; without REM there is none
  st=$stages; [ "$case" = norem ] && st=stages-norem.csv
  expect "$case-score" 0 "$bin" score loud.edf --stages "$st" --quiet --json "$case.json" \
    --minis "$case.csv" --annotations "$case.edf"
  # the night JSON: valid UTF-8 JSON with its schema and provenance
  expect "$case-json-reads" 0 "$py" -c '
import json, sys
d = json.load(open(sys.argv[1], encoding="utf-8"))
assert d["schema"] == "remtone-night/4", d.get("schema")
assert d["provenance"]["inputs"]["recording"]["bytes"] > 0, d["provenance"]' "$case.json"
  # the audit table: RFC 4180 CSV with the documented header (docs/review-report.md);
  # rows only for REM mini-epochs, so none without REM
  expect "$case-minis-reads" 0 "$py" -c '
import csv, sys
rows = list(csv.reader(open(sys.argv[1], encoding="utf-8", newline="")))
assert rows and rows[0][:3] == ["epoch", "mini", "clock_time"], rows[:1]
assert all(len(r) == len(rows[0]) for r in rows), "ragged rows"
want_rows = sys.argv[2] == "rem"
assert (len(rows) > 1) == want_rows, len(rows)' "$case.csv" "$case"
  # the EDF+ annotation file: remtone opens it (its header checks, then EDFlib)
  expect "$case-annotations-scan" 0 "$bin" scan "$case.edf"
  expect "$case-annotations-dump" 0 "$tools/rt_dump" "$case.edf"
  cp "$work/out" "$case-dump.json"
  expect "$case-annotations-texts" 0 "$py" -c '
import json, sys
a = json.load(open(sys.argv[1]))["annotations"]
assert a and all(x["text"].startswith("remtone ") for x in a), a[:3]
none = [x for x in a if x["text"] == "remtone no activity detected"]
assert bool(none) == (sys.argv[2] == "norem"), a[:3]' "$case-dump.json" "$case"
done

# a cohort of both groups: cohort.csv parses, the calibrated cutoffs load
printf 'id,recording,stages,events,group\nq,quiet.edf,%s,,control\nl,loud.edf,%s,,case\n' \
  "$stages" "$stages" > two.csv
expect cohort-two-groups 0 "$bin" cohort two.csv --out two --jobs 1 --min-rem 0
expect cohort-two-table 0 "$py" -c '
import csv, sys
rows = list(csv.DictReader(open(sys.argv[1], encoding="utf-8", newline="")))
assert sorted(r["id"] for r in rows) == ["l", "q"], rows' two/cohort.csv
[ -s two/calibrated-cutoffs.csv ] && ok cohort-two-cutoffs-written || bad "cohort-two-cutoffs-written"
expect cohort-two-cutoffs-load 0 "$bin" score quiet.edf --stages "$stages" --quiet \
  --cutoffs two/calibrated-cutoffs.csv
expect cohort-two-cutoffs-rules 0 "$bin" rules --cutoffs two/calibrated-cutoffs.csv
# the same two nights calibrated per sex and age band: the strata table parses,
# and every stratum cutoff file is one `--cutoffs` reads
printf 'id,recording,stages,events,group,age,sex\nq,quiet.edf,%s,,control,60,F\nl,loud.edf,%s,,case,62,F\n' \
  "$stages" "$stages" > two-strata.csv
expect cohort-strata 0 "$bin" cohort two-strata.csv --out two-strata --jobs 1 --min-rem 0 \
  --by-sex --age-bands 50
expect cohort-strata-table 0 "$py" -c '
import csv, sys
rows = list(csv.reader(open(sys.argv[1], encoding="utf-8", newline="")))
assert rows[0][:3] == ["by", "stratum", "index"] and len(rows) > 1, rows[:1]
assert all(len(r) == len(rows[0]) for r in rows), "ragged rows"' two-strata/calibration-strata.csv
[ -s two-strata/calibrated-cutoffs-sex-F.csv ] && ok cohort-strata-file || bad cohort-strata-file
for f in two-strata/calibrated-cutoffs-*.csv; do
  expect "cohort-strata-loads-${f##*/}" 0 "$bin" score quiet.edf --stages "$stages" --quiet --cutoffs "$f"
done

# a cohort of one group: nothing to calibrate, so no cutoff file -- and the one
# an earlier merge of this folder wrote is gone, not left to describe other nights
cp two/calibrated-cutoffs.csv stale.csv
printf 'id,recording,stages,events,group\nq,quiet.edf,%s,,control\n' "$stages" > one.csv
mkdir -p one && cp stale.csv one/calibrated-cutoffs.csv
expect cohort-one-group 0 "$bin" cohort one.csv --out one --jobs 1 --min-rem 0
grep -qF "no calibrated-cutoffs.csv" "$work/out" && ok cohort-one-says-so || bad "cohort-one-says-so"
if [ -e one/calibrated-cutoffs.csv ]; then
  expect cohort-one-cutoffs-load 0 "$bin" rules --cutoffs one/calibrated-cutoffs.csv
else
  ok cohort-one-no-cutoffs
fi
expect cohort-one-table 0 "$py" -c '
import csv, sys
rows = list(csv.DictReader(open(sys.argv[1], encoding="utf-8", newline="")))
assert [r["id"] for r in rows] == ["q"], rows' one/cohort.csv
# and a cohort of no scored night at all (a recording cut short): one failed row
head -c 1000 quiet.edf > cut.edf
printf 'id,recording,stages,events,group\nx,cut.edf,%s,,control\n' "$stages" > none.csv
expect cohort-none 0 "$bin" cohort none.csv --out none --jobs 1
expect cohort-none-table 0 "$py" -c '
import csv, sys
rows = list(csv.DictReader(open(sys.argv[1], encoding="utf-8", newline="")))
assert [r["level"] for r in rows] == ["failed"], rows' none/cohort.csv
[ -e none/calibrated-cutoffs.csv ] && bad "cohort-none-no-cutoffs" || ok cohort-none-no-cutoffs

finish
