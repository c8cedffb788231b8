#!/usr/bin/env bash
# What the reports say, read back from the outputs themselves: the source of
# each cutoff (published or a lab's file and line) and its unit; the headline
# and the words "reached" / "not reached" in the text, the page and the JSON;
# bars whose abnormal side is always to the right; the leg-movement row; the
# 1-based epoch numbers with clock, seconds and video time in every output;
# the evidence list; the wording of messages. Uses 1-hour synthetic nights.
set -u
bin=${REMTONE_BIN:?}
py=/usr/bin/python3
work="${REMTONE_TMP:-/tmp}/review_words"
rm -rf "$work" && mkdir -p "$work"
fails=0
check() { # check NAME EXPECTED_EXIT CMD...
  local name=$1 want=$2; shift 2
  "$@" >"$work/out" 2>"$work/err"; local got=$?
  if [ "$got" != "$want" ]; then
    echo "FAIL $name: exit $got, want $want"; sed 's/^/    /' "$work/err" "$work/out" | head -12
    fails=$((fails+1))
  else
    echo "ok   $name"
  fi
}
has() { # has NAME FILE TEXT
  if grep -qF -- "$3" "$2"; then echo "ok   $1"; else echo "FAIL $1: '$3' not in $2"; fails=$((fails+1)); fi
}
hasnt() { # hasnt NAME FILE TEXT
  if grep -qF -- "$3" "$2"; then echo "FAIL $1: '$3' in $2"; fails=$((fails+1)); else echo "ok   $1"; fi
}

check synth 0 "$bin" synth --profile rbd --hours 1 --seed 12 --out "$work/n"
n=$work/n

# ---- 3. every cutoff carries its own source and unit -----------------------
printf 'index,cutoff,unit\nsinbar.chin_any_3s,60,%%\nrai,0.5,ratio\nsinbar.chin_tonic_30s,20,%%\n' > "$work/lab.csv"
check rules-lab 0 "$bin" rules --cutoffs "$work/lab.csv"
cp "$work/out" "$work/rules.txt"
# a lab's value is sourced to its file and line, the published value beside it
has rules-lab-line "$work/rules.txt" "the lab's own: $work/lab.csv line 2"
# 18.2 %: Frauscher et al. 2012, Sleep 35:835-847 (src/score/rules.c)
has rules-lab-published "$work/rules.txt" "published: 18.2 %, Frauscher et al. 2012"
check rules-lab-not-paper 0 "$py" - "$work/rules.txt" <<'PY'
import sys
rows = open(sys.argv[1]).read().split("\n")
line = [r for r in rows if r.startswith("sinbar.chin_any_3s ")][0]
assert ">=60" in line and "Frauscher" not in line, line          # the lab value never with the paper
# 31.9 %: Frauscher et al. 2012, Sleep 35:835-847, results table
line = [r for r in rows if r.startswith("sinbar.chin_any_fds_phasic_3s ")][0]
assert ">=31.9" in line and "Frauscher et al. 2012" in line, line  # a published one keeps its paper
PY
# a share written where a percentage is meant is refused, naming file and line
printf 'index,cutoff,unit\nsinbar.chin_any_3s,18.2,%%\nsinbar.chin_tonic_30s,0.3,ratio\n' > "$work/share.csv"
check cutoff-share-refused 5 "$bin" rules --cutoffs "$work/share.csv"
has cutoff-share-line "$work/err" "share.csv line 3: unit \"ratio\" does not fit sinbar.chin_tonic_30s"
printf 'index,cutoff,unit\nrai,80,%%\n' > "$work/rai.csv"
check cutoff-rai-percent-refused 5 "$bin" score "$n/night.edf" --stages "$n/stages.csv" --cutoffs "$work/rai.csv"
has cutoff-rai-line "$work/err" "rai.csv line 2"
# the format before the unit column: a clear refusal saying what to add
printf 'index,cutoff\nsinbar.chin_any_3s,20\n' > "$work/old.csv"
check cutoff-old-format 5 "$bin" score "$n/night.edf" --stages "$n/stages.csv" --cutoffs "$work/old.csv"
has cutoff-old-says "$work/err" "old.csv line 1: the cutoff file has no \"unit\" column"

check score-lab 0 "$bin" score "$n/night.edf" --stages "$n/stages.csv" --cutoffs "$work/lab.csv" --json "$work/lab.json" --html "$work/lab.html"
cp "$work/out" "$work/lab.txt"
# the level says which kind of cutoff was reached; a reason never quotes a
# published value with the lab's file as its source or the reverse
check lab-sources 0 "$py" - "$work/lab.json" "$work/lab.txt" "$work/lab.csv" <<'PY'
import json, sys
d = json.load(open(sys.argv[1])); text = open(sys.argv[2]).read(); lab = sys.argv[3]
ix = d["indices"]
assert ix["sinbar.chin_tonic_30s"]["source"] == lab + " line 4", ix["sinbar.chin_tonic_30s"]
assert ix["sinbar.chin_tonic_30s"]["cutoff_origin"] == "lab"
assert ix["montreal.tonic_chin"]["cutoff_origin"] == "published"
# a recalled value decides nothing (src/score/rules.c marks 16.8 % from memory); a lab's own does
assert ix["sinbar.fds_phasic_3s"]["cutoff_verified"] is False and ix["sinbar.chin_tonic_30s"]["cutoff_verified"] is True
assert ix["montreal.tonic_chin"]["source"].startswith("Montplaisir et al. 2010")
for r in d["review"]["reasons"]:
    if "the lab's cutoff" in r: assert "(" + lab + " line " in r, r
    if "the published cutoff" in r: assert lab not in r, r
st = d["review"]["statement"]
assert d["review"]["level"] == "review"
assert "published cutoffs and the lab's own (lab.csv) are reached" in st, st
assert "REVIEW: published cutoffs and the lab's own (lab.csv) are reached" in text
PY

# ---- 4. the headline and the words "reached" / "not reached" ---------------
printf 'index,cutoff,unit\nsinbar.chin_any_fds_phasic_3s,95,%%\n' > "$work/high.csv"
check score-high 0 "$bin" score "$n/night.edf" --stages "$n/stages.csv" --cutoffs "$work/high.csv" --json "$work/high.json" --html "$work/high.html"
cp "$work/out" "$work/high.txt"
check score-plain 0 "$bin" score "$n/night.edf" --stages "$n/stages.csv" --json "$work/plain.json" --html "$work/plain.html"
cp "$work/out" "$work/plain.txt"
check synth-detached 0 "$bin" synth --profile rbd --hours 1 --seed 12 --detach 60 --out "$work/det"
check score-detached 0 "$bin" score "$work/det/night.edf" --stages "$work/det/stages.csv" --json "$work/det.json" --html "$work/det.html"
cp "$work/out" "$work/det.txt"
check headline-words 0 "$py" - "$work" <<'PY'
import json, sys, xml.etree.ElementTree as ET
w = sys.argv[1]
H = "{http://www.w3.org/1999/xhtml}"
def page(name):
    return ET.parse(w + "/" + name + ".html").getroot()
def text_of(root, id_):
    for e in root.iter():
        if e.get("id") == id_: return "".join(e.itertext())
    raise AssertionError("no #" + id_)
for name in ("plain", "high", "det"):
    d = json.load(open(w + "/" + name + ".json")); t = open(w + "/" + name + ".txt").read()
    h = d["headline"]; root = page(name)
    # one sentence, the same in the text summary, the page and the JSON
    assert h["text"] in t, (name, h["text"])
    assert text_of(root, "headline-cutoff") == h["text"], name
    assert "not computed of REM" not in t and "not computed of REM" not in text_of(root, "headline")
    # the level's statement carries "reached" in all three
    st = d["review"]["statement"]
    assert "reached" in st, st
    assert text_of(root, "level").lower() == st.lower(), (text_of(root, "level"), st)
# 31.9 %: Frauscher et al. 2012, Sleep 35:835-847 (the combined 3-s cutoff)
plain = json.load(open(w + "/plain.json"))["headline"]
assert plain["cutoff_reached"] is True and "the published cutoff 31.9 % is reached." in plain["text"]
# a headline below its cutoff over a review level says why
high = json.load(open(w + "/high.json"))
assert high["headline"]["cutoff_reached"] is False and high["review"]["level"] == "review"
assert "is not reached. The review level rests on other indices" in high["headline"]["text"], high["headline"]["text"]
assert "; the lab's cutoff 95.0 % (" in high["headline"]["text"]
# a detached chin: a sentence with the reason, no index switched silently
det = json.load(open(w + "/det.json"))
assert det["headline"]["cutoff_reached"] is None
assert det["headline"]["text"].startswith("REM with preserved muscle activity cannot be computed: no scorable REM (chin EMG unusable"), det["headline"]["text"]
assert text_of(page("det"), "headline") == "REM with preserved muscle activity: not computed"
# the status words of every index, in the table and the JSON
for name in ("plain", "high"):
    d = json.load(open(w + "/" + name + ".json")); root = page(name)
    rows = {tr.get("data-index"): [ "".join(td.itertext()) for td in tr.findall(H + "td")]
            for tr in root.iter(H + "tr") if tr.get("data-index")}
    for k, v in d["indices"].items():
        words = v["cutoff_words"]
        assert rows[k][5].startswith(words), (k, rows[k][5], words)
        assert words.startswith({True: "reached", False: "not reached", None: "no"}[v["cutoff_reached"]]) \
            or v["status"] == "not-computed", (k, words)
PY
# every bar: a reached cutoff is a bar past its tick, whichever the index's direction
check bars-one-direction 0 "$py" - "$work" <<'PY'
import json, sys, xml.etree.ElementTree as ET
w = sys.argv[1]; S = "{http://www.w3.org/2000/svg}"
for name in ("plain", "high"):
    d = json.load(open(w + "/" + name + ".json"))
    svg = [s for s in ET.parse(w + "/" + name + ".html").getroot().iter(S + "svg")
           if s.get("aria-label") == "Each index against its cutoff"][0]
    bar = None; seen = 0
    for e in svg:
        t = e.find(S + "title")
        if e.tag == S + "rect" and t is not None:
            bar = (t.text.split(":")[0], float(e.get("x")) + float(e.get("width")), e.get("fill"))
        elif e.tag == S + "line" and e.get("stroke") == "#1b2430" and bar:
            k, end, fill = bar; tick = float(e.get("x1")); v = d["indices"][k]
            if v["cutoff_reached"] is not None:
                assert (end >= tick - 0.01) == v["cutoff_reached"], (name, k, end, tick, v)
                seen += 1
            bar = None
    assert seen >= 8, seen     # every index with a cutoff, the REM Atonia Index among them
print("bars checked")
PY

# ---- 5. the leg-movement row: units, its true source, a scale --------------
check leg-row 0 "$py" - "$work" <<'PY'
import json, sys, xml.etree.ElementTree as ET
w = sys.argv[1]; H = "{http://www.w3.org/1999/xhtml}"; S = "{http://www.w3.org/2000/svg}"
d = json.load(open(w + "/plain.json")); root = ET.parse(w + "/plain.html").getroot()
lm = d["indices"]["montreal.rem_leg_movements_per_h"]
row = [tr for tr in root.iter(H + "tr") if tr.get("data-index") == "montreal.rem_leg_movements_per_h"][0]
cells = ["".join(td.itertext()) for td in row.findall(H + "td")]
# numerator and denominator with their units, equal to the JSON's
assert lm["numerator_unit"] == "leg movements" and lm["denominator_unit"] == "3-s REM mini-epochs"
minutes = lm["denominator"] * 3 / 60
assert cells[3] == "%d leg movements in %.1f min of REM" % (lm["numerator"], minutes), cells[3]
assert cells[3] == lm["counted"]
assert cells[2] == "%.1f /h" % lm["value"], cells[2]
# the rate is the count over the time: numerator / hours (no events given: the leg EMG)
assert abs(lm["value"] - lm["numerator"] / (minutes / 60)) < 0.05 + 1e-9, lm
assert "counted from the leg EMG" in lm["reason"] and "limb-movement events" not in cells[1]
# the bar's scale is written beside it
svg = [s for s in root.iter(S + "svg") if s.get("aria-label") == "Each index against its cutoff"][0]
labels = ["".join(t.itertext()) for t in svg.iter(S + "text")]
assert any(l.startswith("%.1f /h" % lm["value"]) and "scale 0 to" in l for l in labels), labels
assert any("scale 1 at the left to 0 at the right" in l for l in labels), labels
PY
# limb-movement events given: the row says so
{ echo "start_s,duration_s,type"; for t in 2925 2955 2985 3015 3045 3075; do echo "$t,2,limb-movement"; done; } > "$work/lm.csv"
check score-lm-events 0 "$bin" score "$n/night.edf" --stages "$n/stages.csv" --events "$work/lm.csv" --json "$work/lm.json" --quiet
check leg-row-events 0 "$py" - "$work/lm.json" <<'PY'
import json, sys
d = json.load(open(sys.argv[1])); lm = d["indices"]["montreal.rem_leg_movements_per_h"]
assert lm["reason"] == "counted from the limb-movement events given, per hour of REM", lm
# six events in REM over the night's REM minutes
assert lm["numerator"] == 6 and abs(lm["value"] - 6 / (d["rem"]["minutes"] / 60)) < 1e-6, lm
PY

# ---- 6, 7. 1-based numbers, clock, seconds and video time in every output --
check score-all 0 "$bin" score "$n/night.edf" --stages "$n/stages.csv" --json "$work/all.json" --html "$work/all.html" --minis "$work/all-minis.csv" --evidence "$work/all-ev.csv" --annotations "$work/all.edf" --video-offset -12.5 --quiet
check numbering 0 "$py" - "$work" -12.5 <<'PY'
import csv, json, re, sys, xml.etree.ElementTree as ET
w = sys.argv[1]; off = float(sys.argv[2]); H = "{http://www.w3.org/1999/xhtml}"
def hms(t):
    s = int(abs(t) + 1e-6) if t >= 0 else int(-t - 1e-6) + (0 if float(-t).is_integer() else 1)
    return ("-" if t < 0 else "") + "%d:%02d:%02d" % (s // 3600, s // 60 % 60, s % 60)
minis = list(csv.DictReader(open(w + "/all-minis.csv")))
ev = list(csv.DictReader(open(w + "/all-ev.csv")))
d = json.load(open(w + "/all.json"))
assert ev and minis
# the minis: mini-epochs 1-10, epoch e starts at (e - 1) x 30 s (epochs counted from 1)
by_epoch = {}
for r in minis:
    e, m = int(r["epoch"]), int(r["mini"])
    assert 1 <= m <= 10 and abs(float(r["elapsed_s"]) - ((e - 1) * 30 + (m - 1) * 3)) < 1e-6, r
    assert r["video_time"] == hms(float(r["elapsed_s"]) - off), (r["video_time"], r["elapsed_s"])
    by_epoch.setdefault(e, []).append(r)
# the evidence list: every flagged epoch, in time order, the same clock and seconds as the minis
epochs = [int(r["epoch"]) for r in ev]
assert epochs == sorted(epochs) and len(set(epochs)) == len(epochs)
for r in ev:
    first = [m for m in by_epoch[int(r["epoch"])] if m["mini"] == "1"][0]
    assert (r["clock_time"], r["elapsed_s"], r["video_time"]) == \
           (first["clock_time"], first["elapsed_s"], first["video_time"]), (r, first)
    # a channel named in the list has activity in the minis, or a Montreal 2-s burst
    for role in r["channels"].split():
        rows = [m for m in by_epoch[int(r["epoch"])] if m["role"] == role]
        assert rows, (r, role)
    marked = {m["role"] for m in by_epoch[int(r["epoch"])] if not m["excluded_by"] and
              (m["aasm_phasic"] == "1" or m["sinbar_phasic"] == "1" or m["sinbar_tonic"] == "1")}
    assert marked <= set(r["channels"].split()), (r, marked)
# an epoch whose minis hold any phasic or tonic label is in the list (flagged)
labelled = {e for e, rows in by_epoch.items() if any(
    not m["excluded_by"] and (m["aasm_phasic"] == "1" or m["sinbar_any"] == "1") for m in rows)}
assert labelled <= set(epochs), sorted(labelled - set(epochs))[:5]
# the JSON's ranked evidence: epochs from the list, with the same clock and video time
evmap = {int(r["epoch"]): r for r in ev}
for x in d["evidence"]:
    r = evmap[x["epoch"]]
    assert x["clock_time"] == r["clock_time"] and abs(x["onset_s"] - float(r["elapsed_s"])) < 1e-6
    assert x["video_time"] == r["video_time"]
# the page: the compact list is the CSV, row for row; the ranked table agrees
root = ET.parse(w + "/all.html").getroot()
tab = [t for t in root.iter(H + "table") if t.get("id") == "evidence-list"][0]
rows = [["".join(td.itertext()) for td in tr.findall(H + "td")] for tr in tab.findall(H + "tr")][1:]
assert len(rows) == len(ev)
for cells, r in zip(rows, ev):
    assert cells == [r["epoch"], r["clock_time"], "%.0f" % float(r["elapsed_s"]), r["video_time"],
                     r["channels"], r["rule_sets"], r["strength"]], (cells, r)
tab = [t for t in root.iter(H + "table") if t.get("id") == "evidence-ranked"][0]
ranked = [["".join(td.itertext()) for td in tr.findall(H + "td")] for tr in tab.findall(H + "tr")][1:]
for cells, x in zip(ranked, d["evidence"]):
    assert int(cells[1]) == x["epoch"] and cells[2] == x["clock_time"] and cells[4] == x["video_time"], (cells, x)
# the annotation file: "remtone evidence RANK epoch E" at the epoch's onset
raw = open(w + "/all.edf", "rb").read()
found = re.findall(rb"\+(\d+(?:\.\d+)?)\x15[\d.]*\x14remtone evidence (\d+) epoch (\d+)\x14", raw)
assert len(found) == min(10, len(d["evidence"])), found
for onset, rank, epoch in found:
    x = d["evidence"][int(rank) - 1]
    assert int(epoch) == x["epoch"] and abs(float(onset) - x["onset_s"]) < 1e-3, (onset, rank, epoch, x)
print("numbering consistent over", len(ev), "flagged epochs")
PY
check video-start 0 "$bin" score "$n/night.edf" --stages "$n/stages.csv" --evidence "$work/vs.csv" --video-start 22:30:00 --quiet
check video-start-time 0 "$py" - "$work/vs.csv" "$n/night.edf" <<'PY'
import csv, sys
# the recording's start time: EDF header bytes 176-183, "hh.mm.ss" (EDF specification, Kemp 1992)
h, m, s = (int(x) for x in open(sys.argv[2], "rb").read()[176:184].decode().split("."))
off = 22 * 3600 + 30 * 60 - (h * 3600 + m * 60 + s)
off = (off + 43200) % 86400 - 43200
for r in csv.DictReader(open(sys.argv[1])):
    v = float(r["elapsed_s"]) - off
    want = ("-" if v < 0 else "") + "%d:%02d:%02d" % (abs(v) // 3600, abs(v) // 60 % 60, abs(v) % 60)
    assert r["video_time"] == want, (r, want)
PY
check video-both 2 "$bin" score "$n/night.edf" --stages "$n/stages.csv" --video-start 22:30:00 --video-offset 5
check video-bad 2 "$bin" score "$n/night.edf" --stages "$n/stages.csv" --video-start 25:00:00
check evidence-over-minis 2 "$bin" score "$n/night.edf" --stages "$n/stages.csv" --minis "$work/same.csv" --evidence "$work/same.csv"
check evidence-over-input 2 "$bin" score "$n/night.edf" --stages "$n/stages.csv" --evidence "$n/stages.csv"
check evidence-stdout 0 "$bin" score "$n/night.edf" --stages "$n/stages.csv" --evidence -
has evidence-stdout-header "$work/out" "epoch,clock_time,elapsed_s,channels,rule_sets,active_minis,strength"
hasnt evidence-stdout-no-summary "$work/out" "remtone night summary"

# ---- 8. wording ------------------------------------------------------------
has ecg-none "$work/plain.txt" "ECG artifact in this channel: none"
hasnt ecg-not-found "$work/plain.txt" "ECG not found"
hasnt ecg-not-found-page "$work/plain.html" "not found"
has left-out-no-brackets "$work/det.txt" "Left out of REM: 9.0 min
"
hasnt empty-brackets "$work/det.txt" "()"
has one-bout "$work/plain.txt" "REM: 9.0 min in 1 bout, "
hasnt one-bouts "$work/plain.html" "in 1 bouts"
check terms-defined 0 "$py" - "$work/plain.html" <<'PY'
import sys, xml.etree.ElementTree as ET
H = "{http://www.w3.org/1999/xhtml}"
root = ET.parse(sys.argv[1]).getroot()
text = " ".join("".join(e.itertext()) for e in root.iter(H + "p"))
assert "REM level: the median of the channel's rectified" in text       # defined on the page
assert "Strength: the epoch's active 3-s mini-epochs" in text
# the navigation links carry the section titles word for word
links = {a.get("href")[1:]: "".join(a.itertext()) for a in root.iter(H + "a") if a.get("href", "").startswith("#")}
titles = {s.get("id"): "".join(s.find(".//" + H + "h2").itertext()) for s in root.iter(H + "section") if s.find(".//" + H + "h2") is not None}
assert links == titles, (links, titles)
PY
check score-help 0 "$bin" score --help
has help-xml "$work/out" "remtone's XML scoring file"
has help-edf-events "$work/out" "an EDF+ file with stage annotations (and its events)"
check csv-as-recording 4 "$bin" score "$n/stages.csv" --stages "$n/night.edf"
has csv-as-recording-says "$work/err" "this is a text table, not an EDF/BDF recording; did you swap the recording and --stages?"
check activity-file 0 "$bin" score "$n/night.edf" --stages "$n/stages.csv" --annotations "$work/activity.edf" --quiet
# a hypnogram-style EDF+ with annotations only (tests/malformed/edf_writer.py, EDF+ by Kemp & Olivan 2003)
check make-hypnogram 0 "$py" -c '
import sys; sys.path.insert(0, sys.argv[1] + "/tests/malformed")
import edf_writer
open(sys.argv[2], "wb").write(edf_writer.edf_bytes([], 120, record_s=30.0, plus=True,
    annotations=[(0.0, 30.0, "Sleep stage W")]))' "${REMTONE_SOURCE:?}" "$work/hypnogram.edf"
check annotations-as-recording 4 "$bin" score "$work/hypnogram.edf" --stages "$n/stages.csv"
has annotations-as-recording-says "$work/err" "hypnogram.edf: an EDF+ file with annotations only (no signals)"
check activity-duration 0 "$py" - "$work/activity.edf" "$n/night.edf" "$work/activity-all.edf" <<'PY'
import re, sys
def duration(p):   # EDF header: record count at bytes 236-243, record duration at 244-251 (Kemp 1992)
    h = open(p, "rb").read(256)
    return int(h[236:244]) * float(h[244:252])
assert duration(sys.argv[1]) == duration(sys.argv[2]), (duration(sys.argv[1]), duration(sys.argv[2]))
raw = open(sys.argv[1], "rb").read()
rules = set(re.findall(rb"remtone phasic (\w+) ", raw))
assert rules == {b"sinbar"}, rules          # one rule set by default: each burst once
PY
check activity-all-rules 0 "$bin" score "$n/night.edf" --stages "$n/stages.csv" --annotations "$work/activity-all.edf" --annotate-bursts aasm,sinbar,montreal --quiet
check activity-rules-chosen 0 "$py" -c '
import re, sys
raw = open(sys.argv[1], "rb").read()
assert set(re.findall(rb"remtone phasic (\w+) ", raw)) == {b"aasm", b"sinbar", b"montreal"}' "$work/activity-all.edf"
check annotate-bursts-bad 2 "$bin" score "$n/night.edf" --stages "$n/stages.csv" --annotate-bursts stream
check ecg-as-chin 0 "$bin" score "$n/night.edf" --stages "$n/stages.csv" --chin ECG
has ecg-as-chin-warns "$work/out" "chin was given channel ECG, whose label reads as an ECG lead"
check ambiguous-prefix 2 "$bin" score "$n/night.edf" --keep
has ambiguous-names "$work/err" "--keep is ambiguous; it could be --keep-artifacts, --keep-snoring, --keep-respiratory"
check merge-missing-dir 3 "$bin" cohort-merge "$work/no-such-dir"
has merge-missing-says "$work/err" "no-such-dir"

echo "$fails failure(s)"
[ "$fails" = 0 ]
