#!/usr/bin/python3
"""Render the HTML report in headless Chromium: the screenshot is not blank and the DOM holds the
findings. Skipped (77) when /usr/bin/chromium is absent.

The report comes from the CLI (`simulate` then `locate --report`) when `locate --help` offers
--report, else from tests/test_report run with --html-out into a fresh temporary folder (so this
test never reads a file another test is writing).
With the CLI, a second report of three taps 3 s apart on a line that rings for far longer (source
end +0.8, fixed end at 100 m: the end's repeats decay by 0.8 per round trip) must show the
measurement warning with its badge and label the earlier taps' echoes as such in the rendered DOM
(the oracle is the simulated line itself: common practice, no source)."""
import os
import re
import struct
import subprocess
import sys
import tempfile
import zlib

CHROMIUM = "/usr/bin/chromium"


def decode_png(path):
    """(width, height, rows of RGB(A) bytes) of an 8-bit RGB or RGBA PNG (what Chromium writes)."""
    with open(path, "rb") as f:
        data = f.read()
    if data[:8] != b"\x89PNG\r\n\x1a\n":
        raise ValueError("not a PNG")
    pos, idat, width = 8, b"", 0
    while pos < len(data):
        n, kind = struct.unpack(">I4s", data[pos:pos + 8])
        body = data[pos + 8:pos + 8 + n]
        if kind == b"IHDR":
            width, height, depth, ctype = struct.unpack(">IIBB", body[:10])
            if depth != 8 or ctype not in (2, 6):
                raise ValueError("unsupported PNG depth %d colour type %d" % (depth, ctype))
            bpp = 3 if ctype == 2 else 4
        elif kind == b"IDAT":
            idat += body
        pos += 12 + n
    raw = zlib.decompress(idat)
    stride = width * bpp
    rows, prev, i = [], bytearray(stride), 0
    for _ in range(height):
        ftype, line = raw[i], bytearray(raw[i + 1:i + 1 + stride])
        i += 1 + stride
        for x in range(stride):
            a = line[x - bpp] if x >= bpp else 0
            b = prev[x]
            c = prev[x - bpp] if x >= bpp else 0
            if ftype == 1:
                line[x] = (line[x] + a) & 255
            elif ftype == 2:
                line[x] = (line[x] + b) & 255
            elif ftype == 3:
                line[x] = (line[x] + (a + b) // 2) & 255
            elif ftype == 4:
                p = a + b - c
                pa, pb, pc = abs(p - a), abs(p - b), abs(p - c)
                line[x] = (line[x] + (a if pa <= pb and pa <= pc else (b if pb <= pc else c))) & 255
        rows.append(bytes(line))
        prev = line
    return width, height, bpp, rows


def chromium(args, tmp):
    profile = tempfile.mkdtemp(prefix="profile-", dir=tmp)
    cmd = [CHROMIUM, "--headless", "--no-sandbox", "--disable-gpu", "--disable-quic", "--no-first-run",
           "--disable-background-networking", "--disable-component-update", "--disable-sync",
           "--user-data-dir=" + profile] + args
    return subprocess.run(cmd, stdout=subprocess.PIPE, stderr=subprocess.PIPE, timeout=120)


def make_report(tmp):
    """Path of a report and the distances (text) it must show."""
    cli = os.environ.get("SE_CLI", "")
    helptext = ""
    if cli and os.path.exists(cli):
        helptext = subprocess.run([cli, "locate", "--help"], stdout=subprocess.PIPE,
                                  stderr=subprocess.STDOUT).stdout.decode("utf-8", "replace")
    if "--report" in helptext:
        rec = os.path.join(tmp, "rec.wav")
        html = os.path.join(tmp, "cli-report.html")
        subprocess.run([cli, "simulate", "--pulse", "hann:1ms", "--rate", "100kHz", "--duration", "0.5s",
                        "--speed", "3000", "--reflector", "250m:0.3", "--end", "600m:fixed",
                        "--noise", "0.001", "-o", rec, "--quiet"], check=True)
        subprocess.run([cli, "locate", rec, "--pulse-channel", "2", "--speed", "3000", "--report", html,
                        "--quiet"], check=True)
        return html, ["250.0", "600.0"]
    prog = os.path.join(os.environ.get("SE_BINARY_DIR", "."), "tests", "test_report")
    if not os.path.exists(prog):
        print("test_report program not built; cannot make a report")
        sys.exit(77)
    subprocess.run([prog, "--html-out", tmp], check=True, stdout=subprocess.PIPE)
    return os.path.join(tmp, "report-sample.html"), ["250.0", "500.0", "600.0", "820.0", "1000.0"]


def overlap_report(tmp):
    """Path of a CLI report of overlapping taps, or None when the CLI cannot make one."""
    cli = os.environ.get("SE_CLI", "")
    if not cli or not os.path.exists(cli):
        return None
    helptext = subprocess.run([cli, "simulate", "--help"], stdout=subprocess.PIPE,
                              stderr=subprocess.STDOUT).stdout.decode("utf-8", "replace")
    if "--shots" not in helptext:
        return None
    rec = os.path.join(tmp, "taps.wav")
    html = os.path.join(tmp, "taps-report.html")
    speed = ["--tension", "100 kN", "--mass-per-length", "5 kg/m", "--source-end", "0.8"]
    subprocess.run([cli, "simulate", "--pulse", "hann:20ms", "--rate", "2000", "--duration", "12",
                    "--end", "100m:fixed", "--shots", "3", "--interval", "3", "--noise", "0.01",
                    "--seed", "3", "-o", rec, "--quiet"] + speed, check=True)
    subprocess.run([cli, "locate", rec, "--pulse-channel", "2", "--report", html, "--quiet"] + speed,
                   check=True, stderr=subprocess.PIPE)
    return html


def main():
    if not os.path.exists(CHROMIUM):
        print("skip: %s is absent (make deps installs it)" % CHROMIUM)
        return 77
    failures = 0
    with tempfile.TemporaryDirectory(prefix="se-browser-") as tmp:
        html, distances = make_report(tmp)
        url = "file://" + os.path.abspath(html)
        shot = os.path.join(tmp, "shot.png")
        r = chromium(["--screenshot=" + shot, "--window-size=1200,1600", url], tmp)
        if not os.path.exists(shot):
            print("FAIL: no screenshot; chromium said:", r.stderr.decode("utf-8", "replace")[-2000:])
            return 1
        w, h, bpp, rows = decode_png(shot)
        if (w, h) != (1200, 1600):
            print("FAIL: screenshot is %dx%d, want 1200x1600" % (w, h))
            failures += 1
        dark = 0
        colours = set()
        for row in rows[::4]:
            for x in range(0, w * bpp, bpp * 4):
                px = row[x:x + 3]
                colours.add(px)
                if sum(px) < 300:
                    dark += 1
        sampled = (h // 4) * (w // 4)
        # not blank: text, table rules and the plot darken at least 0.5 % of the sampled pixels
        if dark < sampled // 200 or len(colours) < 8:
            print("FAIL: screenshot looks blank (%d dark of %d sampled, %d colours)" % (dark, sampled,
                                                                                        len(colours)))
            failures += 1
        r = chromium(["--dump-dom", url], tmp)
        dom = r.stdout.decode("utf-8", "replace")
        if "Findings" not in dom or "<svg" not in dom:
            print("FAIL: the rendered DOM lacks the findings section or the plot")
            failures += 1
        for d in distances:
            if not re.search(r">\s*%s\s*<" % re.escape(d), dom):
                print("FAIL: distance %s not in a table cell of the rendered DOM" % d)
                failures += 1
        # the sample report has unexpected reflections: flagged by the word and the triangle shape
        if html.endswith("report-sample.html") and not re.search(
                r'<span class="flag"><svg[^>]*>.*?</svg>\s*Possible fault</span>', dom, re.S):
            print("FAIL: the 'Possible fault' badge is not in the rendered DOM")
            failures += 1
        if "snap back" not in dom and "snap-back" not in dom:
            print("FAIL: the cautions are not in the rendered DOM")
            failures += 1
        taps = overlap_report(tmp)
        if taps is not None:
            r = chromium(["--dump-dom", "file://" + os.path.abspath(taps)], tmp)
            dom = r.stdout.decode("utf-8", "replace")
            if not re.search(r'<p class="finding warn overlap"><span class="flag"><svg[^>]*>.*?</svg>\s*'
                             r'Measurement warning</span>Taps closer together than the line\'s ring-down\. '
                             r'The taps are 3\.0 s apart but the line rings for', dom, re.S):
                print("FAIL: the overlapping taps' warning is not in the rendered DOM")
                failures += 1
            if "echo of the previous tap: not a fault" not in dom:
                print("FAIL: no event labelled as the previous tap's echo in the rendered DOM")
                failures += 1
            if "Possible fault" in dom:
                print("FAIL: the overlapping taps' report flags a possible fault")
                failures += 1
            print("overlapping taps' report checked")
        else:
            print("note: the CLI cannot simulate taps; the overlapping taps' report was not checked")
    print("report_browser: %s" % ("ok" if failures == 0 else "%d failures" % failures))
    return 1 if failures else 0


if __name__ == "__main__":
    sys.exit(main())
