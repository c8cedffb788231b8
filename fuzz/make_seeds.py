#!/usr/bin/python3
"""Writes the seed inputs of every fuzz target into fuzz/corpus/TARGET/seed-*:
small well-formed files of each format (so the fuzzer starts past the first
checks) and a few near misses. Findings (finding-*) are left alone. Run with
/usr/bin/python3 fuzz/make_seeds.py; the output is deterministic."""
import os
import sys

HERE = os.path.dirname(os.path.abspath(__file__))
sys.path.insert(0, os.path.join(HERE, "..", "tests", "malformed"))
import edf_writer as ew  # noqa: E402


def put(target, name, data):
    d = os.path.join(HERE, "corpus", target)
    os.makedirs(d, exist_ok=True)
    with open(os.path.join(d, "seed-" + name), "wb") as f:
        f.write(data if isinstance(data, bytes) else data.encode("utf-8"))


def wave(rec, i):
    return ((rec * 7 + i * 13) % 200 - 100) * 50


def recordings():
    chin = ew.Signal("Chin1-Chin2", 8, value=wave)
    ecg = ew.Signal("ECG", 4, unit="mV", phys=(-5.0, 5.0), value=wave)
    resp = ew.Signal("Thor", 2, unit="", phys=(-100.0, 100.0), transducer="belt", prefilter="")
    put("recording", "edf", ew.edf_bytes([chin, ecg], 3))
    put("recording", "edf-nonvolt", ew.edf_bytes([chin, resp], 2, record_s=0.5))
    put("recording", "edfplus", ew.edf_bytes([chin, ecg], 3, plus=True,
                                             annotations=[(0.5, 1.0, "Arousal"), (1.0, None, "x")]))
    put("recording", "bdf", ew.edf_bytes([ew.Signal("EMG submental", 4, dig=(-8388608, 8388607),
                                                    value=wave)], 2, bdf=True))
    put("recording", "bdfplus", ew.edf_bytes([ew.Signal("Leg R", 4, dig=(-8388608, 8388607))], 2,
                                             bdf=True, plus=True, annotations=[(0, 30, "Sleep stage W")]))
    put("recording", "ann-only", ew.edf_bytes([], 2, plus=True, annotations=[(0, 30, "Sleep stage W")]))


def annotations():
    chin = ew.Signal("Chin", 4, value=wave)
    stages = [(0, 30, "Sleep stage W"), (30, 60, "Sleep stage R"), (90, 30, "Sleep stage N2"),
              (0, None, "Lights off"), (35.5, 12, "Obstructive Apnea"), (50, 3, "Arousal"),
              (100, None, "Lights on")]
    put("annotations", "stages", ew.edf_bytes([chin], 4, record_s=30, plus=True, annotations=stages,
                                              ann_bytes_per_record=200))
    nodur = [(0, None, "Sleep stage W"), (30, None, "Sleep stage R"), (60, None, "Sleep stage 2"),
             (-5, 10, "Snore")]
    put("annotations", "nodur", ew.edf_bytes([chin], 4, record_s=30, plus=True, annotations=nodur,
                                             ann_bytes_per_record=200))
    put("annotations", "hypnogram", ew.edf_bytes([], 3, record_s=30, plus=True,
                                                 annotations=[(0, 30, "Sleep stage W"),
                                                              (30, 60, "Sleep stage R")]))
    put("annotations", "bad-stage", ew.edf_bytes([chin], 2, record_s=30, plus=True,
                                                 annotations=[(0, 30, "Sleep stage X"), (7, 30, "Sleep stage R")]))


def tables():
    stage_csv = "start_s,duration_s,stage\n0,30,W\n30,60,N1\n90,30,R\n150,30,?\n180,60,REM\n"
    event_csv = "start_s,duration_s,type\n10,12.5,apnea\n20,3,arousal\n25,3,resp-arousal\n60,1,snore\n"
    put("tables", "stages", b"\x00" + stage_csv.encode())
    put("tables", "stages-tab-bom-crlf", b"\x00\xef\xbb\xbfstart_s\tduration_s\tstage\r\n0\t30\tW\r\n30\t30\t\"Stage R\"\r\n")
    put("tables", "stages-map", b"\x80" + b"stage,start_s,duration_s\nWake,0,30\n\"Stage R\",30,90\nmovement,120,30\n")
    put("tables", "events", b"\x01" + event_csv.encode())
    put("tables", "events-map", b"\x81" + b"start_s,duration_s,type\n0,1,Snore?\n5,2,\"limb-movement\"\n")
    put("tables", "staging-csv", b"\x02" + stage_csv.encode())
    put("tables", "staging-xml", b"\x02" + b'<remtone-scoring version="1"><stages><run start-epoch="0" epochs="2" stage="R"/></stages></remtone-scoring>')


def labelmaps():
    put("labelmap", "basic", "label,meaning\nStage R,R\nWake,W\nSnore?,snore\nLights,ignore\nUnk,?\n")
    put("labelmap", "tab-bom", b"\xef\xbb\xbfmeaning\tlabel\r\nN2\tS2\r\nresp-arousal\t\"RERA, arousal\"\r\n")


def cutoffs():
    put("cutoffs", "basic", "index,cutoff,unit\nsinbar.chin_any_3s,20,%\naasm.rswa_epochs,12.5,%\n")
    put("cutoffs", "rai", "index,cutoff,unit,normal_from\nrai,0.8,ratio,0.9\nmontreal.tonic_chin,30,%,\n")


def norms():
    # invented numbers, for the format only
    head = "index,sex,age_from,age_to,percentile,value,unit,source,method\n"
    put("norms", "basic", "# invented\n" + head + "sinbar.chin_any_3s,F,60,70,95,7.5,%,x,visual\n"
        "sinbar.chin_any_3s,any,20,60,95,8,%,y,\nrai,any,20,90,5,0.8,ratio,z,\n")
    put("norms", "overlap", head + "sinbar.chin_any_3s,M,60,70,95,7,%,x,\n"
        "sinbar.chin_any_3s,M,65,75,95,8,%,x,\n")


def xml():
    with open(os.path.join(HERE, "..", "docs", "remtone-scoring-example.xml"), "rb") as f:
        put("xml", "example", f.read())
    put("xml", "small", '<?xml version="1.0"?>\n<remtone-scoring version="1" epoch-s="30">'
        '<stages><epochs start-epoch="0">W N1 R R</epochs></stages>'
        '<events><event onset-s="3" duration-s="2" type="snore" channel="chin"/></events>'
        '</remtone-scoring>\n')


def manifests():
    put("manifest", "basic", "id,recording,stages,events,group\nn1,night.edf,stages.csv,events.csv,case\n"
        "n2,night.edf,,,control\n")
    put("manifest", "roles", "id,recording,stages,events,group,chin,leg-left\nA-1,night.edf,stages.csv,,,"
        "Chin1-Chin2,LAT\n")


def corrections():
    """A reviewer's decisions (docs/corrections.md) in the three forms."""
    put("corrections", "table.csv",
        "elapsed_s,role,decision,reason,reviewer,decided_at\n"
        "600,chin,confirm,,Tech A,2026-12-01\n"
        "603,chin,reject-phasic,artifact,Tech A,2026-12-01T09:30\n"
        "606,arm-left,add-tonic,,Tech A,2026-12-01 09:30:15\n"
        "609,chin,exclude,arousal,Tech A,2026-12-01\n"
        "612,leg-right,exclude,arousal,Tech A,2026-12-01\n")
    put("corrections", "scoring.xml",
        '<remtone-scoring version="1">\n'
        '  <stages><epochs start-epoch="0">W N2 R R</epochs></stages>\n'
        '  <corrections>\n'
        '    <decision kind="reject" activity="phasic" role="chin" onset-s="63" reason="artifact" '
        'reviewer="Tech A" at="2026-12-01T09:30:00"/>\n'
        '    <decision kind="add" activity="tonic" role="chin" onset-s="66" reviewer="Tech A" '
        'at="2026-12-01"/>\n'
        '    <decision kind="exclude" onset-s="70" end-s="80.5" reason="other" reviewer="Tech A" '
        'at="2026-12-01"/>\n'
        '  </corrections>\n'
        '</remtone-scoring>\n')
    put("corrections", "annotations.edf",
        ew.edf_bytes([], 3, record_s=30, plus=True,
                     annotations=[(0, None, "review by Tech A"), (0, None, "review at 2026-12-01T09:30"),
                                  (61.5, None, "reject phasic chin artifact"),
                                  (64, None, "add tonic arm-left"), (67, None, "confirm chin"),
                                  (70, 10.5, "exclude arousal"), (72, 1, "remtone phasic aasm chin")]))


if __name__ == "__main__":
    recordings()
    annotations()
    tables()
    labelmaps()
    cutoffs()
    norms()
    xml()
    manifests()
    corrections()
