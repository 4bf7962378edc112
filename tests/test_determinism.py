#!/usr/bin/python3
"""Determinism: the same inputs and options give byte-identical outputs, run after run and
whatever the working folder, locale, time zone or environment size (JSON, PDF, SVG and PNG plots
and the HTML report from locate; CSV and WAV from simulate, noise included, for a fixed seed)."""
import os
import shutil
import subprocess
import sys
import tempfile

CLI = os.environ.get("SE_CLI")
SRC = os.environ.get("SE_SOURCE_DIR", os.path.join(os.path.dirname(__file__), ".."))
DEMO = os.path.join(SRC, "fixtures", "demo", "hollin-reach-t1.wav")
failures = 0


def run(argv, cwd, env=None):
    p = subprocess.run([CLI, *argv], cwd=cwd, capture_output=True, timeout=60, env=env)
    if p.returncode != 0:
        raise RuntimeError("%s: exit %d: %s" % (argv, p.returncode, p.stderr.decode()))
    return p


def same(name, paths):
    global failures
    blobs = []
    for p in paths:
        with open(p, "rb") as f:
            blobs.append(f.read())
    ok = all(b == blobs[0] for b in blobs) and len(blobs[0]) > 0
    if not ok:
        failures += 1
        for i, b in enumerate(blobs[1:], 1):
            if b != blobs[0]:
                k = next((j for j in range(min(len(b), len(blobs[0]))) if b[j] != blobs[0][j]),
                         min(len(b), len(blobs[0])))
                print("FAIL %s: run %d differs from run 0 at byte %d" % (name, i, k))
    print("%s %s (%d runs, %d bytes)" % ("ok  " if ok else "FAIL", name, len(paths), len(blobs[0])))


def main():
    global failures
    if not CLI or not os.access(CLI, os.X_OK):
        print("SE_CLI not set: skipped")
        return 77
    tmp = tempfile.mkdtemp(prefix="determinism-", dir=os.getcwd())
    try:
        # the same input seen from three folders through the same relative name
        dirs = []
        for i in range(3):
            d = os.path.join(tmp, "run%d" % i)
            os.mkdir(d)
            shutil.copyfile(DEMO, os.path.join(d, "t1.wav"))
            dirs.append(d)
        envs = [None, dict(os.environ, LC_ALL="C.UTF-8", TZ="Pacific/Auckland"),
                dict(os.environ, LC_NUMERIC="de_DE.UTF-8", PADDING="x" * 4000)]
        loc = ["locate", "t1.wav", "--pulse-channel", "2", "--tension", "100 kN",
               "--mass-per-length", "5 kg/m", "--speed-uncertainty", "1", "--quiet", "--json", "out.json"]
        for d, e in zip(dirs, envs):
            run(loc, d, e)
        same("locate JSON", [os.path.join(d, "out.json") for d in dirs])
        stdout = [run(loc[:-3] + ["--json", "-"], d).stdout for d in dirs[:2]]
        if stdout[0] != stdout[1] or not stdout[0]:
            failures += 1
            print("FAIL locate JSON on standard output differs between runs")
        with open(os.path.join(dirs[0], "out.json"), "rb") as f:
            if f.read() != stdout[0]:
                failures += 1
                print("FAIL --json - and --json FILE differ")
        # the plots and the report carry no time of writing (a PDF's /CreationDate is left out)
        outs = ["plot.pdf", "plot.svg", "plot.png", "report.html"]
        for d, e in zip(dirs, envs):
            run(loc[:-2] + ["--plot", "plot.pdf", "--report", "report.html"], d, e)
            run(loc[:-2] + ["--plot", "plot.svg"], d, e)
            run(loc[:-2] + ["--plot", "plot.png"], d, e)
        for o in outs:
            same("locate " + o, [os.path.join(d, o) for d in dirs])
        with open(os.path.join(dirs[0], "plot.pdf"), "rb") as f:
            if b"/CreationDate" in f.read():
                failures += 1
                print("FAIL the PDF carries a creation date")
        sim = ["simulate", "--quiet", "--tension", "100 kN", "--mass-per-length", "5 kg/m", "--pulse",
               "hann:20ms", "--rate", "8000", "--duration", "0.6", "--reflector", "42.7m:-0.35",
               "--end", "70m:fixed", "--noise", "0.01", "--seed", "11"]
        for ext in ("csv", "wav"):
            for d, e in zip(dirs, envs):
                run(sim + ["-o", "sim." + ext], d, e)
            same("simulate " + ext.upper(), [os.path.join(d, "sim." + ext) for d in dirs])
        # a table printed twice is the same too (no clock, no address in it)
        tables = [run(loc[:-3], d).stdout for d in dirs[:2]]
        if tables[0] != tables[1]:
            failures += 1
            print("FAIL the printed table differs between runs")
    finally:
        shutil.rmtree(tmp, ignore_errors=True)
    print("%d passed, %d failed" % (max(0, 11 - failures), failures))
    return 1 if failures else 0


if __name__ == "__main__":
    sys.exit(main())
