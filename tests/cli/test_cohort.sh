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
assert h[:9]==["id","group","subject","visit","flagged","level","reservations","rem_minutes","scorable_minutes"], h
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
has no-calibration-said "$work/out" "no calibration: it needs nights in both groups"
[ -s mixed/nights/broken.error.json ] && ok error-record || bad error-record
expect error-record-shape 0 "$py" -c '
import json,sys; d=json.load(open(sys.argv[1]))
assert d["id"]=="broken" and d["status"]=="recording" and d["exit_code"]==4 and "stages.csv" in d["message"]' mixed/nights/broken.error.json
has failed-row mixed/cohort.csv "broken,case,,,,failed,,"
# the cohort page lists every night and every failure with its message; no
# calibration without a "control" night, and no calibration file is written
has failed-on-page mixed/cohort.html "broken"
has failed-message-on-page mixed/cohort.html "stages.csv"
[ ! -e mixed/calibration.csv ] && [ ! -e mixed/calibrated-cutoffs.csv ] && ok no-calibration-files || bad no-calibration-files
expect help 0 "$bin" cohort --help

# ---- cohort.csv carries each night's warning texts, as its JSON has them
expect warning-texts 0 "$py" -c '
import csv,json,sys
for r in csv.DictReader(open(sys.argv[1]+"/cohort.csv")):
    w=json.load(open(sys.argv[1]+"/nights/"+r["id"]+".json"))["warnings"]
    assert r["warning_texts"]==" | ".join(w), (r["id"], r["warning_texts"], w)
    assert int(r["warnings"])==len(w)' ref

# ---- a named group that no night has: exit 5, the groups present named, and
# nothing replaced (the earlier calibration survives a mistyped name)
cp ref/calibration.csv "$work/cal.before"; cp ref/cohort.csv "$work/table.before"
expect unknown-group 5 "$bin" cohort-merge ref --positive cases
has unknown-group-names "$work/err" 'no night is in the positive group "cases" (the groups present: "case", "control")'
cmp -s ref/calibration.csv "$work/cal.before" && cmp -s ref/cohort.csv "$work/table.before" && ok unknown-group-keeps-files || bad unknown-group-keeps-files
expect unknown-negative 5 "$bin" cohort-merge ref --negative healthy

# ---- --html: each night's own page, linked from the cohort page; a current
# result without its page is scored again, then everything is current
expect pages 0 "$bin" cohort data/manifest.csv --out ref --jobs 2 --html
has pages-rescored "$work/out" "6 scored, 0 already current"
for id in $ids; do [ -s "ref/nights/$id.html" ] || bad "page $id missing"; done
expect pages-rerun 0 "$bin" cohort data/manifest.csv --out ref --jobs 2 --html
has pages-current "$work/out" "0 scored, 6 already current"
# the page: every night linked, round axis ticks (steps of 1, 2 or 5 times a
# power of ten: common practice), labelled ROC axes
expect cohort-page 0 "$py" -c '
import math,re,sys,xml.etree.ElementTree as ET
root=ET.parse(sys.argv[1]).getroot()
ns="{http://www.w3.org/1999/xhtml}"
links=[a.get("href") for a in root.iter() if a.tag.endswith("}a") or a.tag=="a"]
for i in "r1 r2 r3 t4 t5 t6".split():
    assert "nights/%s.html"%i in links, (i, links)
texts=["".join(t.itertext()) for t in root.iter() if t.tag.endswith("text")]
assert "1 - specificity (false-positive rate)" in texts and "sensitivity (true-positive rate)" in texts
svgs=[e for e in root.iter() if e.tag.endswith("svg") and (e.get("aria-label") or "").endswith("by group")]
assert svgs
for svg in svgs:
    ticks=[]
    for t in svg.iter():
        if t.tag.endswith("text") and t.get("y") and re.fullmatch(r"-?[0-9.]+(e[-+]?[0-9]+)?", "".join(t.itertext())):
            ticks.append(float("".join(t.itertext())))
    ticks=sorted(set(ticks))
    assert ticks[0]==0 and len(ticks)>=2, ticks
    step=ticks[1]-ticks[0]
    mant=step/10**math.floor(math.log10(step))
    assert min(abs(mant-m) for m in (1,2,5))<1e-9, (svg.get("aria-label"), ticks)
    assert all(abs((b-a)-step)<1e-9*step for a,b in zip(ticks,ticks[1:])), ticks' ref/cohort.html

# ---- subjects and visits: a person on several nights (common practice in
# longitudinal cohorts: report per subject, calibrate without counting one
# person twice)
{
  echo "id,recording,stages,events,group,subject,visit"
  echo "r1,r1/night.edf,r1/stages.csv,r1/events.csv,case,S1,2026-01"
  echo "r2,r2/night.edf,r2/stages.csv,r2/events.csv,case,S1,2026-07"
  echo "r3,r3/night.edf,r3/stages.csv,r3/events.csv,case,S3,2026-01"
  echo "t4,t4/night.edf,t4/stages.csv,,control,S4,2026-03"
  echo "t5,t5/night.edf,t5/stages.csv,,control,S4,2026-02"
  echo "t6,t6/night.edf,t6/stages.csv,,control,S4,2026-04"
} > data/subjects.csv
expect subjects-relabel 0 "$bin" cohort data/subjects.csv --out ref --jobs 2
has subjects-not-rescored "$work/out" "0 scored, 6 already current"
expect subjects-table 0 "$py" -c '
import csv,sys
nights={r["id"]:r for r in csv.DictReader(open(sys.argv[1]+"/cohort.csv"))}
subj={r["subject"]:r for r in csv.DictReader(open(sys.argv[1]+"/subjects.csv"))}
assert sorted(subj)==["S1","S3","S4"], sorted(subj)
ix="sinbar.chin_any_fds_phasic_3s"
for name,ids in (("S1",["r1","r2"]),("S4",["t5","t4","t6"])):   # visit order
    v=[float(nights[i][ix]) for i in ids]
    s=subj[name]
    assert int(s["nights"])==len(ids) and s["flag"]=="agrees", s
    change=max(abs(b-a) for a,b in zip(v,v[1:]))
    assert abs(float(s[ix+"_mean"])-sum(v)/len(v))<1e-6 and abs(float(s[ix+"_largest_change"])-change)<1e-6, (s, v)
    assert abs(float(s[ix+"_min"])-min(v))<1e-9 and abs(float(s[ix+"_max"])-max(v))<1e-9
assert subj["S3"]["flag"]=="one night" and subj["S3"][ix+"_largest_change"]==""
assert nights["t5"]["subject"]=="S4" and nights["t5"]["visit"]=="2026-02"' ref
has subjects-on-page ref/cohort.html "t5 2026-02 clear; t4 2026-03 clear; t6 2026-04 clear"
expect per-subject 0 "$bin" cohort-merge ref --per-subject
has per-subject-counts "$work/out" 'calibration on 2 "case" and 1 "control" subjects'
expect per-subject-calibration 0 "$py" -c '
import csv,sys
c={r["index"]:r for r in csv.DictReader(open(sys.argv[1]))}
assert int(c["rai"]["n_positive"])==2 and int(c["rai"]["n_negative"])==1, c["rai"]
# the subjects enter with the means of their automatic values (they separate, as the nights do)
assert float(c["rai"]["auc"])>=0.95 and c["rai"]["youden_cutoff"]!="", c["rai"]' ref/calibration.csv
sed 's/^t6,\(.*\),control,S4,/t6,\1,control,S1,/' data/subjects.csv > data/subjects-mixed.csv
expect subject-two-groups 5 "$bin" cohort data/subjects-mixed.csv --out ref --per-subject
has subject-two-groups-named "$work/err" 'subject "S1" has nights in more than one group'

# ---- mixed sites: a row's own label map and cutoff file, and the run's
# label map (docs/staging.md, "Label maps"); the same night under local
# labels scores as under the standard ones
mkdir -p data/site2
sed -e 's/,R$/,Paradoxical/' -e 's/,W$/,Awake/' data/t6/stages.csv > data/site2/stages.csv
printf 'label,meaning\nParadoxical,R\nAwake,W\n' > data/site2/labels.csv
printf 'index,cutoff,unit\nsinbar.chin_any_fds_phasic_3s,12,%%\n' > data/site2/cutoffs.csv
{
  echo "id,recording,stages,events,group,label_map,cutoffs"
  echo "t6,t6/night.edf,t6/stages.csv,,control,,"
  echo "t6b,t6/night.edf,site2/stages.csv,,control,site2/labels.csv,site2/cutoffs.csv"
  echo "t6c,t6/night.edf,site2/stages.csv,,control,,"
} > data/sites.csv
expect sites 0 "$bin" cohort data/sites.csv --out sites --jobs 1
has sites-unmapped-fails "$work/out" "2 scored, 0 already current, 1 failed"
expect sites-same-night 0 "$py" -c '
import json,sys
a=json.load(open(sys.argv[1]+"/t6.json")); b=json.load(open(sys.argv[1]+"/t6b.json"))
for k,v in a["indices"].items():
    assert v["value"]==b["indices"][k]["value"], k
assert a["rem"]==b["rem"]
assert b["indices"]["sinbar.chin_any_fds_phasic_3s"]["cutoff"]==12 and a["indices"]["sinbar.chin_any_fds_phasic_3s"]["cutoff"]!=12
assert b["provenance"]["inputs"]["label_map"]["path"].endswith("site2/labels.csv")' sites/nights
expect sites-run-map 0 "$bin" cohort data/sites.csv --out sites --jobs 1 --label-map data/site2/labels.csv --keep-artifacts --event-margin 2
has sites-run-map-all "$work/out" "3 scored, 0 already current, 0 failed"
expect sites-run-options 0 "$py" -c '
import json,sys
p=json.load(open(sys.argv[1]+"/t6c.json"))["provenance"]["parameters"]
assert p["exclude_artifacts"] is False and p["event_margin_s"]==2, p' sites/nights
expect sites-bad-map 5 "$bin" cohort data/sites.csv --out sites --label-map data/t6/stages.csv

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

# ---- calibration per sex and per age band (--by-sex, --age-bands): each stratum
# calibrated on its own nights, rows without the column counted as unknown and
# left out, a stratum lacking a group without cutoff; each stratum's AUC against
# sklearn.metrics.roc_auc_score (Debian python3-sklearn), or, without it, scipy's
# Mann-Whitney U / (n1 n2), which is the same area (Hanley & McNeil 1982,
# Radiology 143:29-36)
{
  echo "id,recording,stages,events,group,age,sex"
  echo "r1,r1/night.edf,r1/stages.csv,r1/events.csv,case,45,F"
  echo "r2,r2/night.edf,r2/stages.csv,r2/events.csv,case,70,M"
  echo "r3,r3/night.edf,r3/stages.csv,r3/events.csv,case,72,"
  echo "t4,t4/night.edf,t4/stages.csv,,control,48,F"
  echo "t5,t5/night.edf,t5/stages.csv,,control,68.5,M"
  echo "t6,t6/night.edf,t6/stages.csv,,control,,F"
} > data/strata.csv
expect strata-run 0 "$bin" cohort data/strata.csv --out strata --jobs 2 --by-sex --age-bands 50,65
has strata-summary-empty "$work/out" 'age 50-64: 0 "case" and 0 "control" nights, no cutoff: no "case" night in it'
has strata-summary-unknown "$work/out" 'sex unknown: 1 "case" and 0 "control" nights, left out (no sex given)'
expect strata-table 0 "$py" -c '
import csv, sys
d = sys.argv[1]
try:
    from sklearn.metrics import roc_auc_score
    def auc(x, y): return roc_auc_score([1]*len(x) + [0]*len(y), x + y)
except ImportError:
    from scipy.stats import mannwhitneyu
    def auc(x, y): return mannwhitneyu(x, y).statistic / (len(x) * len(y))
nights = {r["id"]: r for r in csv.DictReader(open(d + "/cohort.csv"))}
person = {r["id"]: r for r in csv.DictReader(open(sys.argv[2]))}
rows = list(csv.DictReader(open(d + "/calibration-strata.csv")))
assert rows[0]["by"] == "all" and rows[0]["stratum"] == "all", rows[0]
def members(by, name):
    out = []
    for i, p in person.items():
        if by == "sex": ok = p["sex"] == name if name != "unknown" else p["sex"] == ""
        elif name == "unknown": ok = p["age"] == ""
        elif p["age"] == "": ok = False
        else:
            a = float(p["age"])
            ok = {"<50": a < 50, "50-64": 50 <= a < 65, ">=65": a >= 65}[name]
        if ok: out.append(i)
    return out
want = {("sex","F"): (1,2), ("sex","M"): (1,1), ("sex","unknown"): (1,0), ("age","<50"): (1,1),
        ("age","50-64"): (0,0), ("age",">=65"): (2,1), ("age","unknown"): (0,1)}
seen = set()
for r in rows:
    if r["by"] == "all" or r["index"] not in ("rai", "sinbar.chin_any_fds_phasic_3s"):
        continue
    key = (r["by"], r["stratum"]); seen.add(key)
    ids = members(*key)
    pos = [i for i in ids if person[i]["group"] == "case"]
    neg = [i for i in ids if person[i]["group"] == "control"]
    assert (int(r["n_positive"]), int(r["n_negative"])) == want[key] == (len(pos), len(neg)), (key, r)
    sign = -1 if r["index"] == "rai" else 1   # the REM Atonia Index: abnormal below (Ferri et al. 2010)
    if key[1] == "unknown":
        assert r["auc"] == "" and r["cutoff_file"] == "" and r["note"] == "left out: no %s given" % key[0], r
    elif pos and neg:
        ref = auc([sign * float(nights[i][r["index"]]) for i in pos], [sign * float(nights[i][r["index"]]) for i in neg])
        assert abs(float(r["auc"]) - ref) < 1e-9, (key, r["auc"], ref)
    else:
        assert r["auc"] == "" and r["youden_cutoff"] == "" and r["cutoff_file"] == "", r
        assert r["note"].startswith("no cutoff: no "), r
assert seen == set(want), seen
files = {r["cutoff_file"] for r in rows if r["cutoff_file"] and r["by"] != "all"}
assert files <= {"calibrated-cutoffs-sex-F.csv", "calibrated-cutoffs-sex-M.csv",
                 "calibrated-cutoffs-age-under-50.csv", "calibrated-cutoffs-age-65-plus.csv"}, files
print("\n".join(sorted(files)))' strata data/strata.csv
cp "$work/out" "$work/strata-files"
[ -s "$work/strata-files" ] && ok strata-some-cutoffs || bad "strata-some-cutoffs: no stratum has a cutoff file"
# every stratum cutoff file is one `--cutoffs` reads; none for the empty band
for f in $(cat "$work/strata-files"); do expect "strata-loads-$f" 0 "$bin" rules --cutoffs "strata/$f"; done
[ ! -e strata/calibrated-cutoffs-age-50-64.csv ] && ok strata-empty-band-no-file || bad strata-empty-band-no-file
has strata-page strata/cohort.html "Calibration by stratum"
has strata-page-unknown strata/cohort.html 'Unknown age (left out): 0 &quot;case&quot;, 1 &quot;control&quot; nights.'
# a merge without strata removes the stratum files of the earlier one
expect strata-off 0 "$bin" cohort-merge strata
if ls strata | grep -q 'calibrated-cutoffs-\|calibration-strata'; then bad "strata-off-removes: $(ls strata)"; else ok strata-off-removes; fi
[ -s strata/calibrated-cutoffs.csv ] && ok strata-off-keeps-overall || bad strata-off-keeps-overall
expect strata-bad-order 2 "$bin" cohort-merge strata --age-bands 65,50
expect strata-bad-edge 2 "$bin" cohort-merge strata --age-bands 50,x
expect strata-bad-range 2 "$bin" cohort-merge strata --age-bands 0

# ---- cohort.csv's age and sex (docs/cohort.md, "Files"): the manifest's, last in each row,
# empty where it gives none; a failed night's from its failure record. The strata folder again,
# with one night more that fails (its recording is a CSV file)
{ cat data/strata.csv; echo "broken,r1/stages.csv,r1/stages.csv,,case,61,M"; } > data/person.csv
expect person-run 0 "$bin" cohort data/person.csv --out strata --jobs 2 --quiet
expect person-columns 0 "$py" -c '
import csv, sys
rows = list(csv.DictReader(open(sys.argv[1] + "/cohort.csv")))
person = {r["id"]: r for r in csv.DictReader(open(sys.argv[2]))}
h = list(rows[0].keys())
assert h[:9] == ["id","group","subject","visit","flagged","level","reservations","rem_minutes","scorable_minutes"], h
assert h[-5:] == ["warnings", "warning_texts", "error", "age", "sex"], h
assert sorted(r["id"] for r in rows) == sorted(person), rows
for r in rows:
    p = person[r["id"]]
    assert r["sex"] == p["sex"], (r["id"], r["sex"], p["sex"])
    assert (r["age"] == "") == (p["age"] == "") and (p["age"] == "" or float(r["age"]) == float(p["age"])), (r["id"], r["age"], p["age"])
b = [r for r in rows if r["id"] == "broken"][0]
assert b["level"] == "failed" and b["age"] == "61" and b["sex"] == "M", b' strata data/person.csv
# an earlier remtone's folder: keys and failure records without age and sex, a cohort.csv
# without the two columns. It merges, the two cells empty, every other cell as before
rm -rf older && cp -a strata older
expect person-older-folder 0 "$py" -c '
import csv, glob, json, sys
d = sys.argv[1]
for f in glob.glob(d + "/nights/*.key") + glob.glob(d + "/nights/*.error.json"):
    j = json.load(open(f)); j.pop("age", None); j.pop("sex", None); json.dump(j, open(f, "w"))
rows = list(csv.reader(open(d + "/cohort.csv")))
csv.writer(open(d + "/cohort.csv", "w", newline="")).writerows(r[:-2] for r in rows)' older
expect person-older-merge 0 "$bin" cohort-merge older
expect person-older-table 0 "$py" -c '
import csv, sys
new = list(csv.DictReader(open(sys.argv[1] + "/cohort.csv")))
was = {r["id"]: r for r in csv.DictReader(open(sys.argv[2] + "/cohort.csv"))}
assert len(new) == len(was) == 7, new
for r in new:
    assert r["age"] == "" and r["sex"] == "", r
    w = was[r["id"]]
    assert {k: v for k, v in r.items() if k not in ("age", "sex")} == {k: v for k, v in w.items() if k not in ("age", "sex")}, r["id"]' older strata

echo "$fails failure(s)"
[ "$fails" = 0 ]
