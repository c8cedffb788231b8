#!/usr/bin/env bash
# The correction loop on the command line (docs/corrections.md): the audit
# table remtone writes carries empty decision columns; filled in, it rescores
# the night (exit 0) with both automatic and corrected indices in the JSON and
# the corrections file's identity in the provenance; the same corrections
# give the same result, and the table of the corrected night read back gives
# it again; bad decisions exit 5 naming the file and line, an unreadable file
# exits 3. Uses a 1-hour synthetic night.
set -u
bin=${REMTONE_BIN:?}
py=/usr/bin/python3
work="${REMTONE_TMP:-/tmp}/corrections-cli"
rm -rf "$work" && mkdir -p "$work"
fails=0
. "${REMTONE_SOURCE:?}/tests/cli/checks.sh"
n="$work/n"
check synth 0 "$bin" synth --profile rbd --hours 1 --seed 11 --out "$n"
check score 0 "$bin" score "$n/night.edf" --stages "$n/stages.csv" --minis "$work/m.csv" --json "$work/a.json" --quiet
has empty-columns "$work/m.csv" "excluded_by,decision,reason,reviewer,decided_at"
# fill the table as a spreadsheet would: reject the first chin phasic mark,
# add phasic to the first quiet chin mini-epoch, confirm the next two chin
# rows, exclude one mini-epoch
check fill 0 "$py" - "$work/m.csv" "$work/c.csv" <<'PY'
import csv, sys
rows = list(csv.DictReader(open(sys.argv[1], newline="")))
done = {"reject": 0, "add": 0, "confirm": 0, "exclude": 0}
for r in rows:
    if r["role"] != "chin" or r["excluded_by"]:
        continue
    if not done["reject"] and r["sinbar_phasic"] == "1" and r["sinbar_tonic"] == "0":
        r.update(decision="reject-phasic", reason="artifact"); done["reject"] = 1
    elif not done["add"] and r["sinbar_any"] == "0":
        r.update(decision="add-phasic"); done["add"] = 1
    elif done["add"] and done["reject"] and done["confirm"] < 2:
        r.update(decision="confirm"); done["confirm"] += 1
    elif done["confirm"] == 2 and not done["exclude"]:
        r.update(decision="exclude", reason="arousal"); done["exclude"] = 1
    else:
        continue
    r.update(reviewer="Tech B", decided_at="2026-12-01T10:15")
assert all(done.values()), done
w = csv.DictWriter(open(sys.argv[2], "w", newline=""), fieldnames=rows[0].keys())
w.writeheader(); w.writerows(rows)
PY
check corrected 0 "$bin" score "$n/night.edf" --stages "$n/stages.csv" --corrections "$work/c.csv" --json "$work/b.json" --minis "$work/m2.csv"
has text-section "$work/out" "Corrected by Tech B (c.csv): 2 confirmed, 1 rejected, 1 added, 1 excluded"
check json-both 0 "$py" -c '
import json, sys
a = json.load(open(sys.argv[1])); b = json.load(open(sys.argv[2]))
c = b["corrections"]
assert b["schema"] == "remtone-night/4" and a["corrections"] == {"present": False}
assert c["present"] and c["reviewers"] == "Tech B" and c["minis_left_out"] == 1
assert c["decisions"] == {"confirm": 2, "reject": 1, "add": 1, "exclude": 1}, c["decisions"]
# the automatic indices are the uncorrected night'"'"'s, the corrected ones are b'"'"'s
assert c["automatic"]["indices"] == a["indices"] and c["automatic"]["level"] == a["review"]["level"]
ch = c["changes"]["sinbar.chin_phasic_3s"]
assert ch["added"] == 1 and ch["removed"] == 1 and ch["left_out"] == 1, ch
assert b["indices"]["sinbar.chin_phasic_3s"]["denominator"] == a["indices"]["sinbar.chin_phasic_3s"]["denominator"] - 1
ident = b["provenance"]["inputs"]["corrections"]
assert ident["path"].endswith("c.csv") and ident["bytes"] > 0 and len(ident["xxh3"]) == 16
ag = c["agreement"]["roles"]["chin"]["phasic"]
assert ag["n"] == 4 and ag["both"] + ag["neither"] == 2, ag' "$work/a.json" "$work/b.json"
# idempotent: the same file again, and the corrected table read back
check again 0 "$bin" score "$n/night.edf" --stages "$n/stages.csv" --corrections "$work/c.csv" --json "$work/b2.json" --quiet
check read-back 0 "$bin" score "$n/night.edf" --stages "$n/stages.csv" --corrections "$work/m2.csv" --json "$work/b3.json" --minis "$work/m3.csv" --quiet
check same-results 0 "$py" -c '
import json, sys
d = [json.load(open(p)) for p in sys.argv[1:]]
for x in d[1:]:
    assert x["indices"] == d[0]["indices"] and x["review"] == d[0]["review"]
    assert x["corrections"]["changes"] == d[0]["corrections"]["changes"]
    assert x["corrections"]["agreement"] == d[0]["corrections"]["agreement"]' "$work/b.json" "$work/b2.json" "$work/b3.json"
if cmp -s "$work/m2.csv" "$work/m3.csv"; then echo "ok   same-table"; else echo "FAIL same-table"; fails=$((fails+1)); fi

# refusals: staging class (exit 5) with file and line; unreadable: exit 3
printf 'elapsed_s,role,decision,reason,reviewer,decided_at\n60,chin,confirm,,Tech B,2026-12-01\n' >"$work/wake.csv"
check wake-refused 5 "$bin" score "$n/night.edf" --stages "$n/stages.csv" --corrections "$work/wake.csv" --json "$work/x.json"
has wake-place "$work/err" "wake.csv line 2"
has wake-why "$work/err" "staged W"
if [ -e "$work/x.json" ]; then echo "FAIL refused-no-output"; fails=$((fails+1)); else echo "ok   refused-no-output"; fi
printf 'elapsed_s,role,decision,reason,reviewer,decided_at\n99999,chin,confirm,,Tech B,2026-12-01\n' >"$work/late.csv"
check late-refused 5 "$bin" score "$n/night.edf" --stages "$n/stages.csv" --corrections "$work/late.csv"
has late-place "$work/err" "late.csv line 2: confirm at 99999 s is past the end of the recording"
check missing 3 "$bin" score "$n/night.edf" --stages "$n/stages.csv" --corrections "$work/none.csv"
check same-as-output 2 "$bin" score "$n/night.edf" --stages "$n/stages.csv" --corrections "$work/c.csv" --minis "$work/c.csv"
# cohorts: an optional corrections column; cohort.csv holds both values; the
# corrections file's identity is part of the resume key
printf 'id,recording,stages,events,group,corrections\nA,n/night.edf,n/stages.csv,,case,c.csv\nB,n/night.edf,n/stages.csv,,control,\n' >"$work/manifest.csv"
check cohort 0 "$bin" cohort "$work/manifest.csv" --out "$work/co" --jobs 1
check cohort-table 0 "$py" -c '
import csv, json, sys
rows = {r["id"]: r for r in csv.DictReader(open(sys.argv[1]))}
b = json.load(open(sys.argv[2]))
a, n = rows["A"], rows["B"]
assert a["corrected"] == "true" and n["corrected"] == "false", (a["corrected"], n["corrected"])
ix = "sinbar.chin_phasic_3s"
assert float(a[ix]) == b["indices"][ix]["value"] and float(a["automatic:" + ix]) == b["corrections"]["automatic"]["indices"][ix]["value"]
assert n[ix] == n["automatic:" + ix] == a["automatic:" + ix]' "$work/co/cohort.csv" "$work/b.json"
check cohort-current 0 "$bin" cohort "$work/manifest.csv" --out "$work/co" --jobs 1
has cohort-resumed "$work/out" "0 scored, 2 already current"
sed -i 's/Tech B/Tech C/' "$work/c.csv"
check cohort-changed 0 "$bin" cohort "$work/manifest.csv" --out "$work/co" --jobs 1
has cohort-rescored "$work/out" "1 scored, 1 already current"
# one case, one control: on remtone's values the case's chin phasic index
# equals the control's (the same night), an AUC of 0.5 (a tie counts one
# half: Hanley and McNeil 1982); on the corrected values the case is higher
auc() { "$py" -c '
import csv, sys
print([r for r in csv.DictReader(open(sys.argv[1])) if r["index"] == "sinbar.chin_phasic_3s"][0]["auc"])' "$work/co/calibration.csv"; }
if [ "$(auc)" = "0.5" ]; then echo "ok   calibrate-automatic"; else echo "FAIL calibrate-automatic: auc $(auc)"; fails=$((fails+1)); fi
check cohort-calibrate-corrected 0 "$bin" cohort-merge "$work/co" --calibrate-corrected
if [ "$(auc)" = "1" ]; then echo "ok   calibrate-corrected"; else echo "FAIL calibrate-corrected: auc $(auc)"; fails=$((fails+1)); fi
check help 0 "$bin" score --help
has help-corrections "$work/out" "--corrections FILE"
echo "$fails failure(s)"
[ "$fails" = 0 ]
