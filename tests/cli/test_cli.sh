#!/usr/bin/env bash
# The command-line contract: commands, JSON shapes, exit codes (README.md) and
# that a failed write leaves no file. Uses a 1-hour synthetic night.
set -u
bin=${REMTONE_BIN:?}
py=/usr/bin/python3
work="${REMTONE_TMP:-/tmp}/cli"
rm -rf "$work" && mkdir -p "$work"
fails=0
. "${REMTONE_SOURCE:?}/tests/cli/checks.sh"

check version 0 "$bin" --version
check no-command 2 "$bin"
check unknown-command 2 "$bin" frobnicate
check unknown-option 2 "$bin" score --no-such-option x.edf
check synth-bad-profile 2 "$bin" synth --profile nightmare --out "$work/x"
check synth-bad-hours 2 "$bin" synth --profile rbd --hours 0.2 --out "$work/x"
check synth 0 "$bin" synth --profile rbd --hours 1 --seed 3 --out "$work/n"
check scan 0 "$bin" scan "$work/n/night.edf"
has scan-lists-chin "$work/out" "Chin1-Chin2"
has scan-quality "$work/out" "Signal quality over the whole recording"
check scan-json 0 "$bin" scan "$work/n/night.edf" --json "$work/scan.json"
# the scan JSON shape (remtone's own format): channels[{label, rate_hz, unit, role}], duration_s
check scan-json-shape 0 "$py" -c '
import json,sys; d=json.load(open(sys.argv[1]))
ch={c["label"]:c for c in d["channels"]}
assert len(d["channels"])==20 and abs(d["duration_s"]-3600)<1e-6
assert ch["Chin1-Chin2"]["role"]=="chin" and ch["Chin1-Chin2"]["rate_hz"]==512 and ch["Chin1-Chin2"]["unit"]=="uV"
assert ch["FDS L"]["role"]=="arm-left" and ch["Tib R"]["role"]=="leg-right" and ch["ECG"]["role"]=="ecg"
assert "role" not in ch["C4-M1"] or ch["C4-M1"]["role"] is None
q=d["quality"]["chin"]; assert q["mains_hz"] is None and q["unscorable_total_minutes"]==0 and q["spectrum_narrows_band"] is False' "$work/scan.json"
# remtone scan finds a 50-Hz line and a detached chin lead (docs/quality.md)
check synth-artifacts 0 "$bin" synth --profile typical-older --hours 1 --seed 4 --mains 50:4:2 --detach 2400 --out "$work/art"
check scan-artifacts 0 "$bin" scan "$work/art/night.edf" --json "$work/art.json"
check scan-artifacts-found 0 "$py" -c '
import json,sys; q=json.load(open(sys.argv[1]))["quality"]["chin"]
assert q["mains_hz"]==50 and q["unscorable_minutes"]["flat"]>15, q' "$work/art.json"

check score 0 "$bin" score "$work/n/night.edf" --stages "$work/n/stages.csv" --json "$work/r.json"
has score-cautions "$work/out" "not a diagnosis"
has score-visual-note "$work/out" "visual scoring"
check score-json-shape 0 "$py" -c '
import json,sys; d=json.load(open(sys.argv[1]))
assert d["schema"]=="remtone-night/4"
# the synthetic night is staged from start to end: complete, no gaps (docs/night-json.md)
s=d["staging"]; assert s["complete"] is True and s["staged_hours"]==s["recording_hours"]==1.0 and s["gaps"]==[], s
assert isinstance(d["reservations"],list) and d["review"]["with_reservations"]==(len(d["reservations"])>0)
for k in ("epochs","minutes","scorable_minutes"): assert k in d["rem"]
ids=["aasm.tonic_chin_epochs","aasm.phasic_chin_epochs","aasm.phasic_any_epochs","aasm.rswa_epochs",
 "sinbar.chin_any_3s","sinbar.chin_phasic_3s","sinbar.chin_tonic_30s","sinbar.fds_phasic_3s",
 "sinbar.chin_any_fds_phasic_3s","sinbar.chin_any_fds_phasic_30s","montreal.tonic_chin","montreal.phasic_chin","rai",
 "montreal.rem_leg_movements_per_h"]
assert sorted(d["indices"])==sorted(ids)
for i in ids:
  x=d["indices"][i]; assert x["status"] in ("above","below","intermediate","no-cutoff","not-computed")
  assert x["unit"] in ("%","ratio","/h") and x["source"]
# Montplaisir 2010: 24 leg movements per hour of REM; no limb-movement events here, so counted from
# the leg EMG (docs/exclusions.md): the rbd night moves its legs far more often
lm=d["indices"]["montreal.rem_leg_movements_per_h"]
assert lm["cutoff"]==24 and lm["status"]=="above" and "leg EMG" in lm["reason"], lm
assert d["exclusions"]["minutes"]==0 and d["exclusions"]["policy"]["respiratory"] is True
# Frauscher 2012: SINBAR combined cutoff 31.9 %; Ferri 2010: RAI 0.8
assert d["indices"]["sinbar.chin_any_fds_phasic_3s"]["cutoff"]==31.9 and d["indices"]["rai"]["cutoff"]==0.8
assert d["review"]["flagged"] is True and d["review"]["level"]=="review" and d["review"]["reasons"]
assert len(d["cautions"])>=9 and d["provenance"]["version"] and len(d["provenance"]["inputs"]["recording"]["xxh3"])==16' "$work/r.json"
check score-json-stdout 0 "$bin" score "$work/n/night.edf" --stages "$work/n/stages.csv" --json -
cp "$work/out" "$work/stdout.json"
check score-json-stdout-is-json 0 "$py" -c 'import json,sys; json.load(open(sys.argv[1]))' "$work/stdout.json"

# event-aware scoring: an apnea night's respiratory events and their arousals leave the count
# (policy: docs/exclusions.md); --keep-respiratory turns that off
check synth-apnea 0 "$bin" synth --profile apnea --hours 1 --seed 5 --out "$work/a"
check score-events 0 "$bin" score "$work/a/night.edf" --stages "$work/a/stages.csv" --events "$work/a/events.csv" --json "$work/ae.json"
check score-events-keep 0 "$bin" score "$work/a/night.edf" --stages "$work/a/stages.csv" --events "$work/a/events.csv" --keep-respiratory --json "$work/ak.json"
check events-excluded 0 "$py" -c '
import json,sys; e=json.load(open(sys.argv[1])); k=json.load(open(sys.argv[2]))
x=e["exclusions"]; assert x["minutes"]>0 and x["rem_ahi_per_h"]>0, x
assert set(x["minutes_by_reason"]) <= {"apnea","hypopnea","resp-arousal"}
assert k["exclusions"]["minutes"]==0 and k["rem"]["scorable_minutes"]>e["rem"]["scorable_minutes"]' "$work/ae.json" "$work/ak.json"

# the same apnea night as an XML scoring file (docs/scoring-file.md), with a manual RSWA scoring of
# the first REM epoch that marks every chin mini phasic: the result equals the CSV-based one and
# carries the agreement figures
check xml-write 0 "$py" -c '
import csv,sys
d=sys.argv[1]
st=list(csv.DictReader(open(d+"/stages.csv"))); ev=list(csv.DictReader(open(d+"/events.csv")))
out=["<?xml version=\"1.0\" encoding=\"UTF-8\"?>","<remtone-scoring version=\"1\" epoch-s=\"30\">",
     "<scored-by name=\"Scorer B (fictional)\" date=\"2026-12-01\"/>","<stages>"]
first_r=None
for r in st:
    e0=int(round(float(r["start_s"])/30)); n=int(round(float(r["duration_s"])/30))
    out.append("<run start-epoch=\"%d\" epochs=\"%d\" stage=\"%s\"/>"%(e0,n,r["stage"]))
    if r["stage"]=="R" and first_r is None: first_r=e0*30
out.append("</stages><events>")
for e in ev: out.append("<event onset-s=\"%s\" duration-s=\"%s\" type=\"%s\"/>"%(e["start_s"],e["duration_s"],e["type"]))
out.append("</events><manual-rswa><minis onset-s=\"%d\" role=\"chin\" phasic=\"1111111111\" tonic=\"0000000000\"/></manual-rswa>"%first_r)
out.append("</remtone-scoring>")
open(d+"/scoring.xml","w").write("\n".join(out)+"\n")' "$work/a"
check score-xml 0 "$bin" score "$work/a/night.edf" --stages "$work/a/scoring.xml" --json "$work/ax.json"
check xml-equals-csv 0 "$py" -c '
import json,sys; x=json.load(open(sys.argv[1])); c=json.load(open(sys.argv[2]))
assert x["indices"]==c["indices"] and x["exclusions"]["minutes"]==c["exclusions"]["minutes"]
a=x["agreement"]; assert a["present"] is True, a' "$work/ax.json" "$work/ae.json"

# a lab's cutoff file replaces the published one and the result says so
printf 'index,cutoff,unit\nsinbar.chin_any_3s,99,%%\n' > "$work/cut.csv"
check score-cutoffs 0 "$bin" score "$work/n/night.edf" --stages "$work/n/stages.csv" --cutoffs "$work/cut.csv" --json "$work/c.json"
check score-cutoffs-used 0 "$py" -c '
import json,sys; d=json.load(open(sys.argv[1]))
assert d["indices"]["sinbar.chin_any_3s"]["cutoff"]==99 and d["indices"]["sinbar.chin_any_3s"]["status"]=="below"
assert d["provenance"]["cutoffs"].endswith("cut.csv")' "$work/c.json"
printf 'index,cutoff,unit\nsinbar.nonsense,5,%%\n' > "$work/badcut.csv"
check score-bad-cutoffs 5 "$bin" score "$work/n/night.edf" --stages "$work/n/stages.csv" --cutoffs "$work/badcut.csv"
has bad-cutoffs-line "$work/err" "line 2"

# a stage row missing inside the staging: the gap is listed and the level carries the reservation
# `staging-gaps` in the summary, the JSON result and the page (docs/scoring.md, "Reservations")
awk -F, 'NR != 4' "$work/n/stages.csv" > "$work/holed.csv"
check score-holed 0 "$bin" score "$work/n/night.edf" --stages "$work/holed.csv" --json "$work/h.json" --html "$work/h.html"
has holed-gap-listed "$work/out" "Staging gaps: 1, 8.5 min in all"
has holed-level "$work/out" ", WITH RESERVATIONS: "
has holed-reservation "$work/out" "  - [staging-gaps] "
has holed-page "$work/h.html" 'data-code="staging-gaps"'
check holed-json 0 "$py" -c '
import json,sys; d=json.load(open(sys.argv[1])); s=d["staging"]
assert [r["code"] for r in d["reservations"]][:1]==["staging-gaps"], d["reservations"]
assert s["complete"] is False and s["partial"] is False and s["gaps"]==[{"start_s":960.0,"start_clock":"22:46:00","duration_s":510.0}], s
assert ", with reservations: " in d["review"]["statement"]' "$work/h.json"

# the night in context (docs/review-report.md): every index per REM period in --periods, whose
# counts add up to the night's in the JSON result (common practice: a period's mini-epochs and
# epochs are the night's, split); norms with --age/--sex; the plain sentence in text and JSON
check score-context 0 "$bin" score "$work/n/night.edf" --stages "$work/n/stages.csv" --json "$work/ctx.json" --periods "$work/periods.csv" --age 67 --sex m --html "$work/ctx.html"
has context-sentence "$work/out" "In short: "
has context-sleep "$work/out" "Sleep (from the staging"
has context-norms "$work/out" "Against norms (age 67, man"
has context-page-sentence "$work/ctx.html" 'id="plain-sentence"'
has context-page-periods "$work/ctx.html" 'id="periods"'
has context-page-norms "$work/ctx.html" 'data-band="'
check context-json 0 "$py" -c '
import csv,json,sys; d=json.load(open(sys.argv[1])); rows=list(csv.DictReader(open(sys.argv[2])))
assert d["schema"]=="remtone-night/4"
assert d["plain_sentence"]==d["plain_sentence"].strip() and d["plain_sentence"].endswith("is not a diagnosis.")
assert d["sleep"]["rem_periods"]==len(d["rem_periods"])>=1
assert abs(d["sleep"]["stages"]["R"]["minutes"]-d["rem"]["minutes"])<1e-6, d["sleep"]
assert d["norms"]["sex"]=="M" and d["norms"]["age_years"]==67 and d["norms"]["decides_level"] is False
for ix,v in d["indices"].items():
    if ix.endswith("per_h") or v["status"]=="not-computed": continue
    per=[r for r in rows if r["index"]==ix and not r["period"].startswith("half")]
    assert len(per)==len(d["rem_periods"]), ix
    assert sum(int(r["numerator"]) for r in per)==v["numerator"], ix
    assert sum(int(r["denominator"]) for r in per)==v["denominator"], ix
    assert sum(d["rem_periods"][k]["indices"][ix]["numerator"] for k in range(len(per)))==v["numerator"], ix
assert rows[0]["first_epoch"]==str(d["rem_periods"][0]["first_epoch"])' "$work/ctx.json" "$work/periods.csv"
check score-bad-sex 2 "$bin" score "$work/n/night.edf" --stages "$work/n/stages.csv" --sex X
check score-bad-age 2 "$bin" score "$work/n/night.edf" --stages "$work/n/stages.csv" --age 200
check score-periods-over-input 2 "$bin" score "$work/n/night.edf" --stages "$work/n/stages.csv" --periods "$work/n/stages.csv"

# exit codes of the README table
check missing-recording 3 "$bin" score "$work/nope.edf" --stages "$work/n/stages.csv"
printf 'start_s,duration_s,stage\n0,30,W\n30,45,N2\n' > "$work/bad.csv"
check bad-staging 5 "$bin" score "$work/n/night.edf" --stages "$work/bad.csv"
has bad-staging-line "$work/err" "line 3"
printf 'not an edf at all, but long enough to have a header of some sort........' > "$work/junk.edf"
check malformed-recording 4 "$bin" scan "$work/junk.edf"
check missing-chin-label 6 "$bin" score "$work/n/night.edf" --stages "$work/n/stages.csv" --chin NoSuchLabel
check output-unwritable 7 "$bin" score "$work/n/night.edf" --stages "$work/n/stages.csv" --json "$work/no/such/dir/r.json"
if ls "$work/no" >/dev/null 2>&1; then echo "FAIL output-unwritable left files"; fails=$((fails+1)); fi
# staging from a separate annotation-only EDF+ file (EDF+ spec, Kemp & Olivan 2003: a file
# whose only signal is "EDF Annotations" carries TALs; stage texts "Sleep stage W/R")
check hypnogram-file 0 "$py" -c '
import sys
def f(s,n): return s.ljust(n)[:n].encode()
tals=[b"+0\x14\x14\x00+0\x1530\x14Sleep stage W\x14\x00", b"+30\x14\x14\x00+30\x1530\x14Sleep stage R\x14\x00"]
h=f("0",8)+f("X X X X",80)+f("Startdate 01-JAN-2024 X X X",80)+f("01.01.24",8)+f("22.30.00",8)+f("512",8)+f("EDF+C",44)+f("2",8)+f("30",8)+f("1",4)
h+=f("EDF Annotations",16)+f("",80)+f("",8)+f("-1",8)+f("1",8)+f("-32768",8)+f("32767",8)+f("",80)+f("60",8)+f("",32)
open(sys.argv[1],"wb").write(h+b"".join(t.ljust(120,b"\x00") for t in tals))' "$work/hyp.edf"
check score-hypnogram-edf 0 "$bin" score "$work/n/night.edf" --stages "$work/hyp.edf" --json "$work/h.json"
check score-hypnogram-edf-read 0 "$py" -c '
import json,sys; d=json.load(open(sys.argv[1]))
assert d["rem"]["epochs"]==1 and d["review"]["level"]=="not-assessable"' "$work/h.json"
check rules 0 "$bin" rules
for id in aasm.rswa_epochs sinbar.chin_any_fds_phasic_3s montreal.phasic_chin rai; do has "rules-$id" "$work/out" "$id"; done
# docs/parameters.md is the parameter table's own output: it cannot drift from the code
check rules-params 0 "$bin" rules --params
if cmp -s "$work/out" "${REMTONE_SOURCE:?}/docs/parameters.md"; then echo "ok   parameters-doc-current"
else echo "FAIL parameters-doc-current: regenerate with: build/remtone rules --params > docs/parameters.md"; fails=$((fails+1)); fi
# standard output is checked like any output: a full device is exit 7
if [ -w /dev/full ]; then
  check stdout-full-rules 7 sh -c '"$1" rules --params >/dev/full' sh "$bin"
  check stdout-full-scan 7 sh -c '"$1" scan "$2" >/dev/full' sh "$bin" "$work/n/night.edf"
fi

echo "$((fails)) failed"
[ "$fails" = 0 ]
