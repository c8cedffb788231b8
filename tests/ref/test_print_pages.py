"""One night's review page prints on at most three pages, on A4 and on Letter.

Writes two 7.5-hour synthetic nights like the demo's (an RBD night scored
with --age/--sex and the demo's lab norms file (demo/larchmere-norms.csv, invented
numbers), so the norms with a lab's strata are on the page, and an apnea night with its
events, whose REM apnea-hypopnea index puts reservations on the page), prints
each page to PDF with headless Chromium at both paper sizes (the paper size
set by an added @page rule, as a print dialog would), and counts the PDF's
pages: the leaves of the page tree (PDF 32000-1:2008, 7.7.3: page objects of
/Type /Page, and the root's /Count). The page size of the PDF is checked too
(ISO 216 A4 is 210 x 297 mm = 595 x 842 pt; ANSI Letter 8.5 x 11 in = 612 x
792 pt). Exits 77 (skipped) when /usr/bin/chromium is not installed
(scripts/install-deps --tests installs it).
"""
import os
import re
import shutil
import subprocess
import sys
import tempfile

from chromium import CHROMIUM
import chromium
MOST_PAGES = 3
PAPER = {"A4": (595, 842), "letter": (612, 792)}


def pdf_pages(path):
    """The number of pages and the first page's MediaBox size (points)."""
    data = open(path, "rb").read()
    leaves = len(re.findall(rb"/Type\s*/Page(?![s\w])", data))
    counts = [int(m) for m in re.findall(rb"/Type\s*/Pages\b[^>]*?/Count\s+(\d+)", data)]
    counts += [int(m) for m in re.findall(rb"/Count\s+(\d+)[^>]*?/Type\s*/Pages\b", data)]
    if counts:
        assert max(counts) == leaves, (counts, leaves)
    box = re.search(rb"/MediaBox\s*\[\s*([\d.]+)\s+([\d.]+)\s+([\d.]+)\s+([\d.]+)\s*\]", data)
    size = (float(box.group(3)) - float(box.group(1)), float(box.group(4)) - float(box.group(2)))
    return leaves, size


def print_pdf(page, paper, out, profile):
    sized = out + ".html"
    with open(page, encoding="utf-8") as f:
        html = f.read()
    assert "</head>" in html
    with open(sized, "w", encoding="utf-8") as f:
        f.write(html.replace("</head>", "<style>@page{size:%s}</style></head>" % paper, 1))
    chromium.run(profile, "--no-pdf-header-footer", "--print-to-pdf=" + out, "file://" + sized)


def main():
    if not os.path.exists(CHROMIUM):
        print("SKIP: %s not installed (apt-get install chromium, or scripts/install-deps --tests)"
              % CHROMIUM)
        return 77
    binary = os.environ["REMTONE_BIN"]
    tmp = tempfile.mkdtemp(prefix="print_pages.", dir=os.environ.get("REMTONE_TMP"))
    profile = tempfile.mkdtemp(prefix="chromium.")
    lab_norms = os.path.join(os.environ["REMTONE_SOURCE"], "demo", "larchmere-norms.csv")
    nights = [("rbd", 11, ["--age", "68", "--sex", "M", "--norms", lab_norms]), ("apnea", 13, [])]
    try:
        for profile_name, seed, extra in nights:
            d = os.path.join(tmp, profile_name)
            subprocess.run([binary, "synth", "--profile", profile_name, "--hours", "7.5",
                            "--seed", str(seed), "--out", d], check=True,
                           stdout=subprocess.DEVNULL)
            page = os.path.join(d, "report.html")
            subprocess.run([binary, "score", os.path.join(d, "night.edf"), "--stages",
                            os.path.join(d, "stages.csv"), "--events",
                            os.path.join(d, "events.csv"), "--html", page, "--quiet"] + extra,
                           check=True)
            text = open(page, encoding="utf-8").read()
            if extra:
                assert 'id="norms"' in text, "the norms are not on the page"
                assert 'data-origin="lab-supplied"' in text, "no lab norms on the page"
            else:
                assert 'id="reservations"' in text, "the apnea night shows no reservations"
            for paper, (w, h) in PAPER.items():
                pdf = os.path.join(d, "report-%s.pdf" % paper)
                print_pdf(page, paper, pdf, profile)
                pages, size = pdf_pages(pdf)
                print("%s night on %s: %d pages, %.0f x %.0f pt" % (profile_name, paper, pages,
                                                                  size[0], size[1]))
                assert abs(size[0] - w) <= 1 and abs(size[1] - h) <= 1, size
                assert 2 <= pages <= MOST_PAGES, "%d pages" % pages
    finally:
        shutil.rmtree(profile, ignore_errors=True)
    shutil.rmtree(tmp, ignore_errors=True)  # kept only when a check failed
    print("ok")
    return 0


if __name__ == "__main__":
    sys.exit(main())
