#!/usr/bin/python3
"""strandecho tests: the command-line tool. Bad arguments and unusable files each give exactly one
line on stderr starting "strandecho: error:", the documented exit code (src/cli/main.c usage text:
2 bad command line or option value, 3 input file unreadable or malformed, 4 data cannot give a
result, 5 output cannot be written) and no output file; --help works for every command; a recording
made by `simulate` is located through `locate --json -`.

Run by /usr/bin/python3 with SE_CLI set (CTest does); works in a temporary folder under the cwd."""
import json
import os
import shutil
import subprocess
import sys
import tempfile

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


def run(args, cwd):
    p = subprocess.run([CLI] + args, cwd=cwd, capture_output=True, text=True, timeout=120)
    return p.returncode, p.stdout, p.stderr


def expect_error(args, code, cwd, what):
    """One stderr line "strandecho: error: ...", exit code `code`, no out.json left behind."""
    out = os.path.join(cwd, "out.json")
    if os.path.exists(out):
        os.remove(out)
    rc, so, se = run(args + ["--json", "out.json"] if "--json" not in args else args, cwd)
    lines = se.splitlines()
    desc = "%s: %s -> rc %d, stderr %r" % (what, " ".join(args), rc, se)
    check(rc == code, desc + " (want exit %d)" % code)
    check(len(lines) == 1, desc + " (want exactly one stderr line)")
    check(len(lines) >= 1 and lines[0].startswith("strandecho: error: "), desc + " (prefix)")
    check(len(lines) >= 1 and len(lines[0]) > len("strandecho: error: ") + 5, desc + " (says what)")
    check(not os.path.exists(out), desc + " (out.json must not be created)")
    check(not any(n.startswith("out.json") for n in os.listdir(cwd)),
          desc + " (no temporary output left behind)")


def main():
    if not CLI or not os.path.exists(CLI):
        print("SE_CLI not set or missing: skipped", file=sys.stderr)
        return 77
    tmp = tempfile.mkdtemp(prefix="cli-", dir=os.getcwd())
    try:
        return body(tmp)
    finally:
        shutil.rmtree(tmp, ignore_errors=True)


def body(tmp):
    # a valid two-channel recording to aim the bad arguments at
    rc, so, se = run(["simulate", "--pulse", "hann:4ms", "--rate", "48kHz", "--duration", "0.8s",
                      "--speed", "141.4", "--reflector", "20m:-0.3", "--reflector", "45m:0.25",
                      "--noise", "1e-3", "--seed", "3", "-o", "rec.wav", "--quiet"], tmp)
    if not check(rc == 0 and os.path.exists(os.path.join(tmp, "rec.wav")),
                 "simulate makes rec.wav (rc %d, %s)" % (rc, se)):
        return 1
    base = ["locate", "rec.wav", "--pulse-channel", "2"]
    sp = ["--speed", "141.4"]

    # 2: bad command line or option value
    expect_error(base + sp + ["--bogus"], 2, tmp, "unknown option")
    expect_error(["locate", "rec.wav", "--pulse-channel", "2", "--json", "out.json", "--speed"], 2, tmp,
                 "missing value (last argument)")
    expect_error(base + sp + ["--channel"], 2, tmp, "missing value of --channel")
    expect_error(base + sp + ["--channel", "0"], 2, tmp, "--channel 0")
    expect_error(base + sp + ["--channel", "99"], 2, tmp, "--channel 99 (two channels)")
    expect_error(["locate", "rec.wav", "--pulse-channel", "99"] + sp, 2, tmp, "--pulse-channel 99")
    expect_error(base + ["--speed", "abc"], 2, tmp, "--speed abc")
    expect_error(base + ["--speed", "-5"], 2, tmp, "--speed -5")
    # faster than light: c = 299 792 458 m/s exactly (BIPM SI brochure, 9th ed.)
    expect_error(base + ["--speed", "4e8"], 2, tmp, "--speed 4e8")
    expect_error(base + ["--speed", "0"], 2, tmp, "--speed 0")
    expect_error(base + ["--velocity-factor", "1.5"], 2, tmp, "--velocity-factor 1.5")
    expect_error(base + ["--tension", "100N"], 2, tmp, "--tension without --mass-per-length")
    expect_error(base + ["--mass-per-length", "5kg/m"], 2, tmp, "--mass-per-length alone")
    expect_error(base + ["--speed", "141.4", "--velocity-factor", "0.66"], 2, tmp, "two speed options")
    expect_error(base + ["--speed", "141.4", "--tension", "100N", "--mass-per-length", "5e-3kg/m"], 2,
                 tmp, "speed and tension")
    expect_error(base + sp + ["--quantity", "pressure"], 2, tmp, "unknown --quantity")
    expect_error(["locate", "--speed", "141.4"], 2, tmp, "no recording")
    expect_error(["locate", "rec.wav"], 2, tmp, "no speed")
    expect_error(["frobnicate"], 2, tmp, "unknown command")
    expect_error(["simulate", "--pulse", "hann:4ms", "--rate", "48kHz", "--duration", "1s", "--speed",
                  "141.4"], 2, tmp, "simulate without -o")
    expect_error(["simulate", "--pulse", "nosuch:4ms", "--rate", "48kHz", "--duration", "1s", "--speed",
                  "141.4", "-o", "sim.wav"], 2, tmp, "simulate with an unknown pulse")
    check(not os.path.exists(os.path.join(tmp, "sim.wav")), "failed simulate leaves no sim.wav")

    # 3: input file unreadable or malformed
    expect_error(["locate", "missing.wav"] + sp, 3, tmp, "file that does not exist")
    os.mkdir(os.path.join(tmp, "adir"))
    expect_error(["locate", "adir"] + sp, 3, tmp, "a directory")
    with open(os.path.join(tmp, "garbage.wav"), "wb") as f:
        f.write(bytes((i * 37 + 11) % 256 for i in range(4096)))
    expect_error(["locate", "garbage.wav"] + sp, 3, tmp, "garbage file")
    open(os.path.join(tmp, "empty.wav"), "wb").close()
    expect_error(["locate", "empty.wav"] + sp, 3, tmp, "zero-length file")
    with open(os.path.join(tmp, "text.csv"), "w") as f:
        f.write("time,value\nthis,is\nnot,numbers\n")
    expect_error(["locate", "text.csv"] + sp, 3, tmp, "CSV without numbers")
    if os.geteuid() != 0:  # root reads anything: the mode test means nothing there
        shutil.copy(os.path.join(tmp, "rec.wav"), os.path.join(tmp, "locked.wav"))
        os.chmod(os.path.join(tmp, "locked.wav"), 0)
        expect_error(["locate", "locked.wav"] + sp, 3, tmp, "file without read permission")

    # 5: output cannot be written
    rc, so, se = run(base + sp + ["--json", os.path.join("nodir", "out.json")], tmp)
    lines = se.splitlines()
    check(rc == 5, "--json into a missing folder: exit 5 (got %d, %r)" % (rc, se))
    check(len(lines) == 1 and lines[0].startswith("strandecho: error: "),
          "--json into a missing folder: one error line (%r)" % se)
    rc, so, se = run(base + sp + ["--json", "rec.wav"], tmp)
    check(rc != 0 and se.startswith("strandecho: error: "),
          "--json over the input is refused (rc %d, %r)" % (rc, se))

    # --help for every command, and version
    for args in (["--help"], ["-h"], ["help"], ["locate", "--help"], ["simulate", "--help"]):
        rc, so, se = run(args, tmp)
        check(rc == 0 and so.startswith("usage:") and se == "",
              "%s: exit 0, usage on stdout (rc %d, stderr %r)" % (" ".join(args), rc, se))
    rc, so, se = run(["locate", "--help"], tmp)
    for opt in ("--channel", "--pulse-channel", "--pulse", "--speed", "--velocity-factor", "--tension",
                "--mass-per-length", "--quantity", "--json"):
        check(opt in so, "locate --help names %s" % opt)
    rc, so, se = run(["--help"], tmp)
    for code in ("2 bad command line", "3 input file", "4 data", "5 output"):
        check(code in so, "--help documents exit code '%s'" % code)
    rc, so, se = run(["version"], tmp)
    check(rc == 0 and so.startswith("strandecho "), "version (%r)" % so)
    rc, so, se = run([], tmp)
    check(rc == 2 and "usage" in se, "no command: usage on stderr, exit 2")

    # simulate -> locate --json - : the reflectors come back
    rc, so, se = run(base + sp + ["--json", "-"], tmp)
    if check(rc == 0, "locate --json - (rc %d, %r)" % (rc, se)):
        try:
            doc = json.loads(so)
        except ValueError as e:
            check(False, "stdout is JSON: %s (%r)" % (e, so[:200]))
            doc = None
        if doc is not None:
            ev = doc.get("events", [])
            check(se == "", "nothing on stderr with --json - (%r)" % se)
            # d = v t / 2 (REFERENCE.md 1); reflectors at 20 m (-0.3: inverted, fixed-like in
            # velocity) and 45 m (+0.25 seen through the first: 0.25 (1 - 0.09), upright, free-like)
            for d, pol, cls, refl in ((20.0, "inverted", "fixed-like", -0.3),
                                      (45.0, "upright", "free-like", 0.25 * 0.91)):
                near = [e for e in ev if abs(e["distance_m"] - d) < 0.05]
                if check(len(near) == 1, "one event near %g m (got %r)" % (d, [e["distance_m"] for e in ev])):
                    e = near[0]
                    check(abs(e["distance_m"] - d) <= max(3 * e["distance_uncertainty_m"], 0.005),
                          "event at %g m: %.5f +/- %.5f" % (d, e["distance_m"], e["distance_uncertainty_m"]))
                    check(e["polarity"] == pol, "event at %g m polarity %s" % (d, e["polarity"]))
                    check(e["class"] == cls, "event at %g m class %s" % (d, e["class"]))
                    check(abs(e["reflection"] - refl) < 0.02,
                          "event at %g m reflection %.4f want %.4f" % (d, e["reflection"], refl))
                    check(e["multiple"] is False, "event at %g m is not a multiple" % d)
    # the table goes to stdout and names the speed, noise, threshold and dead zone
    rc, so, se = run(base + sp, tmp)
    check(rc == 0 and "dead zone" in so and "threshold" in so and "speed used" in so,
          "terminal table (rc %d)" % rc)

    if failures:
        print("test_cli.py: %d of %d checks failed" % (failures, checks), file=sys.stderr)
        return 1
    print("test_cli.py: all %d checks passed" % checks)
    return 0


if __name__ == "__main__":
    sys.exit(main())
