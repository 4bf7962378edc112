#!/usr/bin/python3
"""strandecho tests: the outputs of `locate` (--plot PNG/SVG/PDF, --plot-size, --report, --csv)
and `compare` (table, --json, --plot, exit codes).

- PNG: the signature and the IHDR width and height equal --plot-size (PNG spec, ISO/IEC 15948
  section 11.2.2: IHDR first, big-endian width then height);
- SVG: well-formed XML (xml.etree), one marker se-event-N per event of the JSON, each marker's
  data-distance-m equal to the event's distance (to 1 mm);
- PDF: "%PDF-" header and "%%EOF" trailer (ISO 32000-1, 7.5.2 and 7.5.5);
- HTML report: well-formed enough for html.parser with balanced tags, no external URL, the event
  distances in the text;
- CSV: a header row and one row per event, distances equal to the JSON's;
- compare: a baseline and a recording with one new reflector, 0.3 % faster and 10 % louder: exit 0,
  exactly one change that may be a fault, new, where it was put; bad arguments exit 2.
Oracles: the file format specifications named above and the JSON of the same run."""
import csv
import html.parser
import json
import os
import shutil
import struct
import subprocess
import sys
import tempfile
import xml.etree.ElementTree as ET

CLI = os.environ.get("SE_CLI")
failures = 0
checks = 0


def check(cond, what):
    global failures, checks
    checks += 1
    if not cond:
        failures += 1
        print("FAIL: " + what, file=sys.stderr)
    return cond


# Sanitizer builds: LSAN_OPTIONS from CTest points at tests/lsan.supp (fontconfig's cache).


def run(args, cwd):
    p = subprocess.run([CLI] + args, cwd=cwd, capture_output=True, text=True, timeout=120)
    return p.returncode, p.stdout, p.stderr


class TagBalance(html.parser.HTMLParser):
    VOID = {"meta", "br", "hr", "img", "link", "input", "col", "wbr", "source", "area", "base"}

    def __init__(self):
        super().__init__()
        self.stack = []
        self.bad = []
        self.text = []

    def handle_starttag(self, tag, attrs):
        if tag not in self.VOID:
            self.stack.append(tag)

    def handle_startendtag(self, tag, attrs):
        pass

    def handle_endtag(self, tag):
        if tag in self.VOID:
            return
        if not self.stack or self.stack[-1] != tag:
            self.bad.append(tag)
        else:
            self.stack.pop()

    def handle_data(self, data):
        self.text.append(data)


SIM = ["--pulse", "hann:20ms", "--rate", "8000", "--duration", "2.5", "--mass-per-length",
       "1.25 kg/m", "--noise", "0.003", "--quiet"]
SPEED = ["--tension", "20 kN", "--mass-per-length", "1.25 kg/m"]


def main():
    if not CLI or not os.path.exists(CLI):
        print("SE_CLI not set or missing: skipped")
        return 77
    tmp = tempfile.mkdtemp(prefix="outs-", dir=os.getcwd())
    try:
        rc, _, se = run(["simulate"] + SIM + ["--tension", "20 kN", "--reflector", "40m:-0.3",
                                              "--reflector", "75m:+0.15", "--end", "140m:fixed",
                                              "--seed", "5", "-o", "base.wav"], tmp)
        check(rc == 0, "simulate base (%s)" % se)
        rc, _, se = run(["simulate"] + SIM + ["--tension", "20.12 kN", "--gain", "0.55",
                                              "--reflector", "40m:-0.3", "--reflector", "75m:+0.15",
                                              "--reflector", "100m:-0.2", "--end", "140m:fixed",
                                              "--seed", "6", "-o", "now.wav"], tmp)
        check(rc == 0, "simulate now (%s)" % se)

        rc, so, se = run(["locate", "base.wav", "--pulse-channel", "2"] + SPEED +
                         ["--json", "r.json", "--plot", "p.png", "--plot-size", "640x480",
                          "--csv", "e.csv", "--report", "r.html", "--quiet"], tmp)
        check(rc == 0, "locate with every output (%s)" % se)
        res = json.load(open(os.path.join(tmp, "r.json")))
        events = res["events"]
        check(len(events) >= 3, "three events at least (clamp, chafe, end)")

        png = open(os.path.join(tmp, "p.png"), "rb").read()
        check(png[:8] == b"\x89PNG\r\n\x1a\n", "PNG signature")
        check(png[12:16] == b"IHDR" and struct.unpack(">II", png[16:24]) == (640, 480),
              "PNG is 640 x 480 (got %r)" % (struct.unpack(">II", png[16:24]),))

        rc, _, se = run(["locate", "base.wav", "--pulse-channel", "2"] + SPEED +
                        ["--plot", "p.svg", "--quiet"], tmp)
        check(rc == 0, "locate --plot svg (%s)" % se)
        root = ET.parse(os.path.join(tmp, "p.svg")).getroot()
        marks = {}
        for el in root.iter():
            i = el.get("id") or ""
            if i.startswith("se-event-"):
                marks[int(i[len("se-event-"):])] = el
        check(sorted(marks) == list(range(1, len(events) + 1)),
              "one SVG marker per event (got %r for %d events)" % (sorted(marks), len(events)))
        for k, ev in enumerate(events, 1):
            if k in marks:
                d = float(marks[k].get("data-distance-m"))
                check(abs(d - ev["distance_m"]) < 1e-3, "marker %d at %.4f m (JSON %.4f)"
                      % (k, d, ev["distance_m"]))

        rc, _, se = run(["locate", "base.wav", "--pulse-channel", "2"] + SPEED +
                        ["--plot", "p.pdf", "--quiet"], tmp)
        check(rc == 0, "locate --plot pdf (%s)" % se)
        pdf = open(os.path.join(tmp, "p.pdf"), "rb").read()
        check(pdf.startswith(b"%PDF-") and b"%%EOF" in pdf[-32:], "PDF header and trailer")

        rc, _, se = run(["locate", "base.wav", "--pulse-channel", "2"] + SPEED +
                        ["--plot", "p.bmp"], tmp)
        check(rc == 2 and se.startswith("strandecho: error:"), "--plot .bmp refused, exit 2")
        rc, _, se = run(["locate", "base.wav", "--pulse-channel", "2"] + SPEED +
                        ["--plot", "p.png", "--plot-size", "10x10"], tmp)
        check(rc == 2, "--plot-size 10x10 refused, exit 2")

        text = open(os.path.join(tmp, "r.html"), encoding="utf-8").read()
        tb = TagBalance()
        tb.feed(text)
        check(not tb.bad and not tb.stack, "HTML tags balanced (bad %r, open %r)" % (tb.bad[:5], tb.stack[:5]))
        check("http://" not in text.replace("http://www.w3.org/2000/svg", "") and "https://" not in text
              and "src=" not in text, "report is self-contained")
        body = "".join(tb.text)
        for ev in events:
            check("%.1f" % ev["distance_m"] in body, "report text holds %.1f m" % ev["distance_m"])

        rows = list(csv.DictReader(open(os.path.join(tmp, "e.csv"))))
        check(len(rows) == len(events), "one CSV row per event")
        for row, ev in zip(rows, events):
            check(abs(float(row["distance_m"]) - ev["distance_m"]) < 1e-6 * max(1, ev["distance_m"]),
                  "CSV distance %s equals JSON %.6f" % (row["distance_m"], ev["distance_m"]))

        # compare (the new reflector at 100 m: no multiple of the others coincides with an echo there
        # or with the end, e.g. not 105 m, where 40 -> 105 -> 40 -> 75 arrives with the end)
        rc, so, se = run(["compare", "base.wav", "now.wav", "--pulse-channel", "2"] + SPEED +
                         ["--json", "c.json", "--plot", "c.svg"], tmp)
        check(rc == 0, "compare exit 0 (%s)" % se)
        check("new" in so and "speed change +0.30" in so, "compare table: new, speed change")
        c = json.load(open(os.path.join(tmp, "c.json")))["compare"]
        faults = [x for x in c["changes"] if not x["secondary"]]
        check(len(faults) == 1 and faults[0]["kind"] == "new", "exactly the new reflector (%r)" % faults)
        if faults:
            check(abs(faults[0]["distance_m"] - 100.0 / 1.003) < 0.5, "at 100 m / 1.003 (got %.3f)"
                  % faults[0]["distance_m"])
        ET.parse(os.path.join(tmp, "c.svg"))
        rc, _, se = run(["compare", "base.wav"] + SPEED, tmp)
        check(rc == 2 and se.startswith("strandecho: error:"), "compare with one recording exits 2")
        rc, _, se = run(["compare", "base.wav", "none.wav", "--pulse-channel", "2"] + SPEED, tmp)
        check(rc == 3, "compare with a missing recording exits 3 (got %d)" % rc)
        rc, so, _ = run(["compare", "--help"], tmp)
        check(rc == 0 and "exit codes" in so, "compare --help lists exit codes")
    finally:
        shutil.rmtree(tmp, ignore_errors=True)
    print("test_cli_outputs: %d of %d checks failed" % (failures, checks) if failures
          else "test_cli_outputs: all %d checks passed" % checks)
    return 1 if failures else 0


if __name__ == "__main__":
    sys.exit(main())
