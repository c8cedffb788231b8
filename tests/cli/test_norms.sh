#!/usr/bin/env bash
# A lab's norms file (docs/scoring.md, "Norms"): `score --norms` places the indices the file
# lists against the row of the person's sex and age band, and says which (JSON stratum,
# text, page, plain sentence); `cohort --norms` and the manifest's `norms` column do the same
# per night. The choice of the most specific stratum is common practice for normative tables;
# the expected band is worked out here from the value and the file's limit. Every number in the
# norms files below is invented for the test.
. "${REMTONE_SOURCE:?}/tests/cli/checks.sh" norms

check synth 0 "$bin" synth --profile rbd --hours 1 --seed 3 --out n
cat > norms.csv <<'CSV'
# invented numbers for this test only
index,sex,age_from,age_to,percentile,value,unit,source,method
sinbar.chin_any_3s,F,60,70,95,7.5,%,invented reference group A,visual 3-s mini-epochs
sinbar.chin_any_3s,any,60,70,95,30,%,invented reference group B,
sinbar.chin_phasic_3s,M,60,70,95,6,%,invented reference group C,
rai,F,60,70,5,0.6,ratio,invented reference group D,
CSV
check score-norms 0 "$bin" score n/night.edf --stages n/stages.csv --norms norms.csv --age 64 --sex F --json r.json --html r.html
has text-norms-file "$work/out" "the lab's norms file norms.csv"
has text-stratum "$work/out" "of women aged 60-69, lab file norms.csv line 3"
has text-source "$work/out" "source: invented reference group A; scored: visual 3-s mini-epochs"
has page-stratum r.html "of women aged 60-69, lab file norms.csv line 3"
has page-source r.html "invented reference group A"
has page-origin r.html 'data-origin="lab-supplied"'
check json-stratum 0 "$py" -c '
import json,sys; d=json.load(open(sys.argv[1])); n=d["norms"]
assert d["schema"]=="remtone-night/4" and n["file"]=="norms.csv" and n["decides_level"] is False, n
x=n["indices"]["sinbar.chin_any_3s"]; s=x["stratum"]
assert s=={"sex":"F","age_from":60.0,"age_to":70.0,"age_to_included":False,"percentile":95.0,
           "label":s["label"],"file":"norms.csv","line":3}, s
assert x["normal_limit"]==7.5 and x["normal_limit_origin"]=="lab-supplied", x
assert x["normal_limit_source"]=="invented reference group A" and x["method"]=="visual 3-s mini-epochs"
want="within" if x["value"]<=7.5 else ("beyond-rbd-cutoff" if x["value"]>=x["rbd_cutoff"] else "beyond-normal-limit")
assert x["band"]==want, (x["value"], x["band"])
# the file lists the phasic index for men only: not placed, never against the built-in value
p=n["indices"]["sinbar.chin_phasic_3s"]
assert p["band"]=="not-placed" and p["stratum"] is None and p["normal_limit"] is None, p
assert p["not_placed_reason"]=="no row of the norms file is for women", p
# the REM Atonia Index against its 5th percentile, lower being further from atonia
r=n["indices"]["rai"]; assert r["stratum"]["line"]==6 and r["band"]==("within" if r["value"]>=0.6 else "beyond-normal-limit"), r
# not listed: the built-in overall value, published
t=n["indices"]["sinbar.chin_tonic_30s"]
assert t["normal_limit_origin"]=="published" and t["stratum"]["file"] is None and t["stratum"]["age_to_included"] is True, t
assert "Feemster et al. 2019" in t["normal_limit_source"]
assert "norms for women aged 60-69 (lab file norms.csv lines 3, 6)" in d["plain_sentence"], d["plain_sentence"]
assert d["provenance"]["inputs"]["norms"]["path"].endswith("norms.csv"), d["provenance"]["inputs"]' r.json
# the file alone, without an age: the indices it lists are not placed, and say why
check score-norms-no-age 0 "$bin" score n/night.edf --stages n/stages.csv --norms norms.csv --json r2.json --quiet
check json-no-age 0 "$py" -c '
import json,sys; n=json.load(open(sys.argv[1]))["norms"]; x=n["indices"]["sinbar.chin_any_3s"]
assert n["age_years"] is None and x["band"]=="not-placed" and x["not_placed_reason"].startswith("no age given"), x' r2.json
# the same night without the file: the built-in values, and no file named
check score-builtin 0 "$bin" score n/night.edf --stages n/stages.csv --age 64 --sex F --json r3.json --quiet
check json-builtin 0 "$py" -c '
import json,sys; n=json.load(open(sys.argv[1]))["norms"]
assert n["file"] is None and all(v["normal_limit_origin"]=="published" for v in n["indices"].values()), n' r3.json

# refusals: exit 5 (a malformed input file) naming the file and line; a missing file exit 3;
# the norms file is an input, so an output may not overwrite it (exit 2)
printf 'index,sex,age_from,age_to,percentile,value,unit,source\nsinbar.chin_any_3s,F,60,70,95,0.075,ratio,x\n' > bad-unit.csv
check bad-unit 5 "$bin" score n/night.edf --stages n/stages.csv --norms bad-unit.csv --age 64
has bad-unit-line "$work/err" "bad-unit.csv line 2: unit \"ratio\" does not fit sinbar.chin_any_3s"
cp "$work/err" score-bad-unit.err
printf 'index,sex,age_from,age_to,percentile,value,unit,source\nsinbar.chin_any_3s,F,60,70,95,7,%%,x\nsinbar.chin_any_3s,F,65,75,95,8,%%,y\n' > overlap.csv
check overlap 5 "$bin" score n/night.edf --stages n/stages.csv --norms overlap.csv --age 64
has overlap-lines "$work/err" "overlap.csv line 3: sinbar.chin_any_3s, sex F, percentile 95: ages 65 to under 75 overlap ages 60 to under 70 of line 2"
cp "$work/err" score-overlap.err
check missing 3 "$bin" score n/night.edf --stages n/stages.csv --norms nowhere.csv
cp "$work/err" score-missing.err
check over-input 2 "$bin" score n/night.edf --stages n/stages.csv --norms norms.csv --json norms.csv
has help-norms <("$bin" score --help) "--norms FILE"

# ---- rules --norms: the file's rows, each with its line, after the rule table (as --cutoffs
# shows a cutoff file's); the labels are the score's own for the same rows (text-stratum above)
check rules-norms 0 "$bin" rules --norms norms.csv
cp "$work/out" rules-norms.txt
has rules-norms-table rules-norms.txt "Cutoffs in force: published"
has rules-norms-file rules-norms.txt "Norms of the lab's file norms.csv (4 rows;"
has rules-norms-line3 rules-norms.txt "95th percentile (7.5 %) of women aged 60-69, lab file norms.csv line 3"
has rules-norms-line4 rules-norms.txt "95th percentile (30 %) of women and men aged 60-69, lab file norms.csv line 4"
has rules-norms-line5 rules-norms.txt "95th percentile (6 %) of men aged 60-69, lab file norms.csv line 5"
has rules-norms-line6 rules-norms.txt "5th percentile (0.6) of women aged 60-69, lab file norms.csv line 6"
has rules-norms-source rules-norms.txt "source: invented reference group A; scored: visual 3-s mini-epochs"
# every data line of the file once, in file order, under its own index id (read from the file)
check rules-norms-rows 0 "$py" -c '
import re,sys
want=[]
for n,l in enumerate(open(sys.argv[1]),1):
    if l.startswith("#") or l.startswith("index,"): continue
    want.append((l.split(",")[0],n))
got=[(m.group(1),int(m.group(2))) for m in re.finditer(r"^(\S+) +\S.* lab file norms\.csv line (\d+)$",open(sys.argv[2]).read(),re.M)]
assert got==want,(got,want)' norms.csv rules-norms.txt
printf 'index,cutoff,unit\nsinbar.chin_any_3s,25,%%\n' > lab-cutoffs.csv
check rules-norms-cutoffs 0 "$bin" rules --cutoffs lab-cutoffs.csv --norms norms.csv
has rules-both-cutoff "$work/out" "the lab's own: lab-cutoffs.csv line 2"
has rules-both-norms "$work/out" "lab file norms.csv line 6"
# a refused file: score's message and exit code, and nothing listed
for bad in bad-unit:5:bad-unit.csv overlap:5:overlap.csv missing:3:nowhere.csv; do
  IFS=: read -r name code file <<<"$bad"
  check "rules-$name" "$code" "$bin" rules --norms "$file"
  cmp -s "$work/err" "score-$name.err" && ok "rules-$name-message" || bad "rules-$name-message: $(cat "$work/err") is not $(cat "score-$name.err")"
  [ ! -s "$work/out" ] && ok "rules-$name-nothing-listed" || bad "rules-$name-nothing-listed"
done
has help-rules-norms <("$bin" rules --help) "--norms FILE"
if [ -w /dev/full ]; then
  check rules-norms-stdout-full 7 sh -c '"$1" rules --norms norms.csv >/dev/full' sh "$bin"
fi

# ---- cohort: the run's --norms, and a row's own `norms` column replacing it
cp norms.csv site-norms.csv
sed -i 's/,7.5,%,invented reference group A,/,1.5,%,invented reference group E,/' site-norms.csv
printf 'id,recording,stages,events,group,age,sex,norms\n' > manifest.csv
printf 'a,n/night.edf,n/stages.csv,,case,64,F,site-norms.csv\n' >> manifest.csv
printf 'b,n/night.edf,n/stages.csv,,case,64,F,\n' >> manifest.csv
printf 'c,n/night.edf,n/stages.csv,,case,,,\n' >> manifest.csv
check cohort-run 0 "$bin" cohort manifest.csv --out co --jobs 1 --norms norms.csv --quiet
check cohort-json 0 "$py" -c '
import json,sys
a,b,c=(json.load(open(sys.argv[1]+"/"+k+".json"))["norms"] for k in "abc")
xa,xb=a["indices"]["sinbar.chin_any_3s"],b["indices"]["sinbar.chin_any_3s"]
assert a["file"].endswith("site-norms.csv") and xa["normal_limit"]==1.5 and xa["normal_limit_source"]=="invented reference group E", xa
assert xa["stratum"]["line"]==3 and xa["stratum"]["file"].endswith("site-norms.csv")
assert b["file"]=="norms.csv" and xb["normal_limit"]==7.5, xb
assert xa["value"]==xb["value"] and xa["band"]==("within" if xa["value"]<=1.5 else "beyond-normal-limit" if xa["value"]<xa["rbd_cutoff"] else "beyond-rbd-cutoff")
# the run has a norms file: a night without an age is placed too, and says why not
assert c["age_years"] is None and c["indices"]["sinbar.chin_any_3s"]["not_placed_reason"].startswith("no age given"), c' co/nights
check cohort-rerun 0 "$bin" cohort manifest.csv --out co --jobs 1 --norms norms.csv
has cohort-kept "$work/out" "0 scored"
# another norms file is another result: the nights that read it are scored again
sed -i 's/,1.5,%/,1.6,%/' site-norms.csv
check cohort-changed 0 "$bin" cohort manifest.csv --out co --jobs 1 --norms norms.csv
has cohort-rescored "$work/out" "1 scored"
check cohort-bad-norms 5 "$bin" cohort manifest.csv --out co2 --norms bad-unit.csv
printf 'id,recording,stages,events,group,norms\na,n/night.edf,n/stages.csv,,case,nowhere.csv\n' > bad-manifest.csv
check cohort-missing-row-norms 3 "$bin" cohort bad-manifest.csv --out co3
finish
