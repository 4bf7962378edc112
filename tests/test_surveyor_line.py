"""The line as a surveyor would describe it, from the command line: a recording with repeated taps
(four, 7 s apart, closer than the line's ring-down), a reverberating source end (+0.5, not given:
estimated) and a splice (+0.2 at 60.8 m) beside a clamp (-0.5 at 60 m) in front of a fixed end at
150 m. `strandecho simulate` writes it (lattice model, noise 0.01), `strandecho locate` reads it
with the pulse channel as the reference.

Checks (tolerances are common practice, no source):
- the terminal table lists exactly three reflections, the clamp, the splice and the end, each
  within 5 cm and with its polarity, and counts the rest as multiples (not listed);
- the overlap warning (taps closer than the ring-down) is printed on standard error;
- the JSON holds every event: exactly those three are primaries, every other is labelled
  `multiple`, some as echoes of earlier taps (`previous_shot`), and the source-end coefficient is
  estimated within 0.05 of +0.5;
- with --verbose every event is listed.

A second line rings for about 19 s and is tapped every 3 s (four taps): the first tap, which no
earlier tap rings into, is left out of the stack as unlike the others, so each stacked shot holds
the echoes of one to three earlier taps. Their weights in the stack follow from which shots were
stacked (not from the count alone): the table lists exactly the two reflectors (60 m, 150 m), the
whole-record run and `--stream` alike.
"""
import json
import os
import re
import shutil
import sys
import tempfile

from clitest import Checks, have_cli, run

check = Checks("test_surveyor_line")


def main():
    if not have_cli():
        print("SE_CLI not set: skipped")
        return 77
    tmp = tempfile.mkdtemp(prefix="surveyor-", dir=os.getcwd())
    try:
        speed = ["--tension", "100 kN", "--mass-per-length", "5 kg/m"]
        rc, _, se = run(["simulate", "--quiet", "--pulse", "hann:20ms", "--rate", "48000", "--duration",
                         "30", "--interval", "7s", "--shots", "4", *speed, "--reflector", "60m:-0.5",
                         "--reflector", "60.8m:+0.2", "--end", "150m:fixed", "--source-end", "0.5",
                         "--noise", "0.01", "-o", "taps.wav"], tmp)
        if not check(rc == 0, "simulate exits 0 (%d %s)" % (rc, se)):
            return 1
        loc = ["locate", "taps.wav", "--pulse-channel", "2", *speed, "--source-end", "estimate"]
        rc, out, se = run(loc + ["--json", "taps.json"], tmp)
        if not check(rc == 0, "locate exits 0 (%d %s)" % (rc, se)):
            return 1
        rows = [l for l in out.splitlines() if re.match(r"^\s*\d+\s+\d+\.\d{3}\s", l)]
        want = [(60.0, "inverted"), (60.8, "upright"), (150.0, "inverted")]
        check(len(rows) == 3, "the table lists three reflections (got %d)\n%s" % (len(rows), out))
        for row, (d, pol) in zip(rows, want):
            f = row.split()
            check(abs(float(f[1]) - d) < 0.05 and f[4] == pol,
                  "table row at %g m, %s: %s" % (d, pol, row))
            check("multiple" not in row, "a listed reflection is not a multiple: %s" % row)
        m = re.search(r"and (\d+) multiples \((\d+) of them echoes of earlier taps\), not listed", out)
        check(m is not None, "the multiples are counted, not listed")
        check("the taps are 7.0 s apart but the line rings for" in se and "tap at least" in se,
              "the overlap warning on standard error (%s)" % se.strip())
        with open(os.path.join(tmp, "taps.json")) as f:
            res = json.load(f)
        evs = res["events"]
        prim = [e for e in evs if not e["multiple"]]
        check(len(prim) == 3 and all(abs(e["distance_m"] - d) < 0.05 for e, (d, _) in zip(prim, want)),
              "JSON: exactly the three primaries (%s)" % [round(e["distance_m"], 3) for e in prim])
        check(m is None or int(m.group(1)) == len(evs) - 3, "the counted multiples are the JSON's")
        check(any(e["previous_shot"] for e in evs if e["multiple"]), "some multiples are earlier taps'")
        check(res["shots_overlap"] is True and res["ring_down_s"] > 7.0, "the overlap flagged in JSON")
        check(res["source_reflection_estimated"] and abs(res["source_reflection_used"] - 0.5) < 0.05,
              "source end estimated near +0.5 (%g)" % res["source_reflection_used"])
        check(len(res["warnings"]) == 1, "one warning in the JSON")
        rc, out, _ = run(loc + ["--verbose"], tmp)
        rows = [l for l in out.splitlines() if re.match(r"^\s*\d+\s+\d+\.\d{3}\s", l)]
        check(rc == 0 and len(rows) == len(evs), "--verbose lists every event (%d of %d)" % (len(rows), len(evs)))
        fast_taps(tmp)
    finally:
        shutil.rmtree(tmp, ignore_errors=True)
    return check.done()


def fast_taps(tmp):
    rc, _, se = run(["simulate", "--quiet", "--pulse", "hann:2ms", "--rate", "20kHz", "--duration",
                     "12s", "--speed", "141.42", "--reflector", "60:-0.3", "--end", "150:fixed",
                     "--source-end", "0.5", "--shots", "4", "--interval", "3s", "--noise", "0.002",
                     "-o", "fast.wav"], tmp)
    if not check(rc == 0, "simulate the fast taps exits 0 (%d %s)" % (rc, se)):
        return
    for extra in ([], ["--stream"]):
        rc, out, se = run(["locate", "fast.wav", "--pulse-channel", "2", "--speed", "141.42",
                           "--json", "fast.json"] + extra, tmp)
        if not check(rc == 0, "locate %s exits 0 (%d %s)" % (extra, rc, se)):
            continue
        with open(os.path.join(tmp, "fast.json")) as f:
            res = json.load(f)
        check(res["shots_found"] == 4 and res["shots_used"] == 3,
              "%s: 4 taps found, the first left out (%d, %d)" % (extra, res["shots_found"],
                                                                 res["shots_used"]))
        rows = [l for l in out.splitlines() if re.match(r"^\s*\d+\s+\d+\.\d{3}\s", l)]
        dist = [float(r.split()[1]) for r in rows]
        check(len(dist) == 2 and abs(dist[0] - 60.0) < 0.01 and abs(dist[1] - 150.0) < 0.01,
              "%s: the table lists exactly 60 m and 150 m (%s)" % (extra, dist))
        check(res["shots_overlap"] is True, "%s: the overlap flagged" % extra)


if __name__ == "__main__":
    sys.exit(main())
