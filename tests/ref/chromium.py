"""Headless Chromium as the reference checks run it: offline, no first-run
work, a throw-away profile. Shared by test_html_chromium.py and
test_print_pages.py."""
import subprocess

CHROMIUM = "/usr/bin/chromium"
FLAGS = ["--headless", "--no-sandbox", "--disable-gpu", "--disable-quic", "--no-first-run",
         "--disable-background-networking", "--disable-component-update", "--disable-sync"]


def run(profile, *args):
    """Runs Chromium with the shared flags, the profile folder and args; fails on error."""
    subprocess.run([CHROMIUM] + FLAGS + ["--user-data-dir=" + profile] + list(args),
                   check=True, stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL, timeout=180)
