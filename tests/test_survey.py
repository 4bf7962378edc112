#!/usr/bin/python3
"""strandecho tests: `strandecho survey`. Three invented legs (made with `simulate`, lattice model)
and a survey file naming them, one with a baseline recording:

- --jobs 2 gives byte-identical JSON Lines to --jobs 1, and each object equals (apart from its
  "survey" and "compare" keys) the JSON of a single `locate` run of that recording: threads change
  nothing;
- the shards 1/2 and 2/2, merged, equal the single run, and each shard holds exactly its lines
  (K, K+N, ...);
- the leg with a baseline reports exactly one change that may be a fault, the reflector added;
- no progress bar when stderr is not a terminal;
- a survey file error names FILE:LINE:COLUMN and exits 3; a bad --shard exits 2;
- a line's skin_loss (a datasheet value, or `estimate`) reaches the locator: the object equals a
  single `locate --skin-loss` run and holds K = 6.6 / (20 / ln 10) / 100 / sqrt(pi 1e8) s^0.5/m
  (units.h's conversion, the neper-decibel relation of NIST SP 811); a bad value is refused naming
  FILE:LINE:COLUMN;
- taps closer together than the ring-down are noted "taps overlap" in the summary table;
- the combined report holds every line's name; run with the survey file's full path it shows the
  recordings as the file gives them (legs/...), the full paths only beside their SHA-256, and the
  baseline line's finding as the comparison's sentence, flagged "Possible fault".

Oracle: the simulated lines themselves and the single-run results (common practice, no source)."""
import json
import math
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


# Sanitizer builds: LSAN_OPTIONS from CTest points at tests/lsan.supp (fontconfig's cache).


def run(args, cwd):
    p = subprocess.run([CLI] + args, cwd=cwd, capture_output=True, text=True, timeout=120)
    return p.returncode, p.stdout, p.stderr


SURVEY = """site: Fenwold test mast (invented)
date: 2026-05-02
lines:
  - name: Guy A
    recording: legs/a.wav
    pulse_channel: 2
    tension: 20 kN
    mass_per_length: 1.25 kg/m
  - name: Guy B
    recording: legs/b-now.wav
    baseline: legs/b-before.wav
    baseline_date: "2025"
    pulse_channel: 2
    tension: 20 kN
    mass_per_length: 1.25 kg/m
  - name: Guy C
    recordings: [legs/c.wav]
    pulse_channel: 2
    tension: 20 kN
    mass_per_length: 1.25 kg/m
"""

# 20 kN on 1.25 kg/m: sqrt(T/mu) = 126.49 m/s (REFERENCE.md 1 [calc]); 8 kHz, hann 20 ms.
SIM = ["--pulse", "hann:20ms", "--rate", "8000", "--duration", "2.5", "--mass-per-length",
       "1.25 kg/m", "--noise", "0.003", "--quiet"]
LEGS = {
    "a.wav": ["--tension", "20 kN", "--reflector", "35m:-0.3", "--end", "140m:fixed", "--seed", "1"],
    "b-before.wav": ["--tension", "20 kN", "--reflector", "50m:-0.25", "--end", "130m:fixed",
                     "--seed", "2"],
    # 0.6 % more tension: 0.3 % faster; 10 % more gain; a new reflector at 92 m
    "b-now.wav": ["--tension", "20.12 kN", "--gain", "0.55", "--reflector", "50m:-0.25",
                  "--reflector", "92m:+0.18", "--end", "130m:fixed", "--seed", "3"],
    "c.wav": ["--tension", "20 kN", "--reflector", "70m:+0.2", "--end", "150m:fixed", "--seed", "4"],
}


def strip(o):
    o = dict(o)
    o.pop("survey", None)
    o.pop("compare", None)
    return o


def main():
    if not CLI or not os.path.exists(CLI):
        print("SE_CLI not set or missing: skipped")
        return 77
    tmp = tempfile.mkdtemp(prefix="svy-", dir=os.getcwd())
    try:
        os.mkdir(os.path.join(tmp, "legs"))
        for name, args in LEGS.items():
            rc, _, se = run(["simulate"] + SIM + args + ["-o", "legs/" + name], tmp)
            if not check(rc == 0, "simulate %s: %s" % (name, se)):
                return 1
        with open(os.path.join(tmp, "site.yaml"), "w") as f:
            f.write(SURVEY)

        rc1, so1, se1 = run(["survey", "site.yaml", "--jobs", "1", "--jsonl", "one.jsonl",
                             "--report", "site.html"], tmp)
        check(rc1 == 0, "survey --jobs 1 exit 0 (got %d: %s)" % (rc1, se1))
        check(se1 == "", "no progress bar or message when stderr is not a terminal: %r" % se1)
        rc2, _, se2 = run(["survey", "site.yaml", "--jobs", "2", "--jsonl", "two.jsonl", "--quiet"],
                          tmp)
        check(rc2 == 0, "survey --jobs 2 exit 0 (%s)" % se2)
        one = open(os.path.join(tmp, "one.jsonl")).read()
        two = open(os.path.join(tmp, "two.jsonl")).read()
        check(one == two, "--jobs 2 gives the same bytes as --jobs 1")
        objs = [json.loads(l) for l in one.splitlines()]
        check(len(objs) == 3, "one JSON object per recording (got %d)" % len(objs))
        check(all("\n" not in l for l in one.splitlines()), "compact: one line each")
        check([o["survey"]["line_index"] for o in objs] == [1, 2, 3], "survey order")
        for name in ("Guy A", "Guy B", "Guy C"):
            check(name in so1, "summary table names %s" % name)
        check(" legs/b-now.wav " in so1, "summary table shows the recording as the survey file gives it")
        html = open(os.path.join(tmp, "site.html")).read()
        for name in ("Guy A", "Guy B", "Guy C", "Fenwold test mast"):
            check(name in html, "report holds %s" % name)

        # the survey file by its full path: the report shows the paths the survey file gives
        full = os.path.join(tmp, "site.yaml")
        rc, so, se = run(["survey", full, "--report", "abs.html"], tmp)
        check(" legs/c.wav " in so and tmp + "/legs" not in so.split("\n\n")[1],
              "the table shows legs/c.wav, not the full path")
        check(rc == 0, "survey by full path exit 0 (%s)" % se)
        html = open(os.path.join(tmp, "abs.html")).read()
        for rec in ("legs/a.wav", "legs/b-now.wav", "legs/c.wav"):
            check("<td>%s</td>" % rec in html, "summary shows %s as given" % rec)
            check("<td>%s</td><td>recording</td>" % os.path.join(tmp, rec) in html,
                  "input files table shows %s in full" % rec)
        check("<td>%s</td><td>baseline recording</td>" % os.path.join(tmp, "legs/b-before.wav") in html,
              "the baseline recording with its SHA-256")
        check(html.count(tmp + "/") == 4, "the run's folder only in the input files table (%d times)"
              % html.count(tmp + "/"))
        row = html[html.find('href="#line-2"'):]
        row = row[:row.find("</tr>")]
        check("Possible fault</span>" in row and
              "Since the 2025 survey (speed +0.30 %): new reflection at 91." in row,
              "Guy B's summary finding is the comparison's, flagged: %r" % row[-300:])
        check("Possible fault" not in html[html.find('href="#line-1"'):html.find('href="#line-2"')],
              "Guy A is not flagged")

        # three single runs equal the threaded survey's objects
        for o, rec in zip(objs, ["legs/a.wav", "legs/b-now.wav", "legs/c.wav"]):
            rc, so, se = run(["locate", rec, "--pulse-channel", "2", "--tension", "20 kN",
                              "--mass-per-length", "1.25 kg/m", "--json", "-"], tmp)
            check(rc == 0, "locate %s (%s)" % (rec, se))
            single = json.loads(so)
            check(strip(o) == single, "survey object of %s equals a single locate run" % rec)

        # the baseline comparison: exactly the new reflector (92 m / 1.003 with the survey's speed)
        b = objs[1]
        check("compare" in b and "compare" not in objs[0], "compare only where a baseline is named")
        if "compare" in b:
            faults = [c for c in b["compare"]["changes"] if not c["secondary"]]
            check(len(faults) == 1, "exactly one change that may be a fault (got %r)" % faults)
            if faults:
                check(faults[0]["kind"] == "new", "the change is new")
                check(abs(faults[0]["distance_m"] - 92.0 / 1.003) < 0.5,
                      "new reflector at 92 m / 1.003 (got %.3f)" % faults[0]["distance_m"])
            check(abs(b["compare"]["speed_change"] - 0.003) < 2e-4,
                  "speed change 0.3 %% (got %g)" % b["compare"]["speed_change"])

        # shards merge to the single run
        merged = []
        for k in (1, 2):
            rc, _, se = run(["survey", "site.yaml", "--shard", "%d/2" % k, "--jsonl",
                             "shard%d.jsonl" % k, "--quiet"], tmp)
            check(rc == 0, "shard %d/2 exit 0 (%s)" % (k, se))
            lines = open(os.path.join(tmp, "shard%d.jsonl" % k)).read().splitlines()
            idx = [json.loads(l)["survey"]["line_index"] for l in lines]
            check(idx == list(range(k, 4, 2)), "shard %d/2 holds lines %r (got %r)"
                  % (k, list(range(k, 4, 2)), idx))
            merged += lines
        merged.sort(key=lambda l: (json.loads(l)["survey"]["line_index"],
                                   json.loads(l)["survey"]["recording_index"]))
        check(merged == one.splitlines(), "shards 1/2 + 2/2 merged equal the single run")

        # errors
        rc, _, se = run(["survey", "site.yaml", "--shard", "3/2"], tmp)
        check(rc == 2 and se.startswith("strandecho: error:"), "--shard 3/2 exits 2 (%d %s)" % (rc, se))
        with open(os.path.join(tmp, "bad.yaml"), "w") as f:
            f.write("site: x\nlines:\n  - name: A\n    recording: legs/a.wav\n    speeed: 100\n")
        rc, _, se = run(["survey", "bad.yaml"], tmp)
        check(rc == 3 and "bad.yaml:5:5" in se and "speeed" in se,
              "unknown key named with FILE:LINE:COLUMN, exit 3 (%d %s)" % (rc, se))
        with open(os.path.join(tmp, "two.yaml"), "w") as f:
            f.write("lines:\n  - recording: legs/a.wav\n    speed: 100\n---\nlines: []\n")
        rc, _, se = run(["survey", "two.yaml"], tmp)
        check(rc == 3 and "two.yaml:5:1" in se and "second YAML document" in se,
              "a second YAML document is refused, not ignored (%d %s)" % (rc, se))
        with open(os.path.join(tmp, "nobase.yaml"), "w") as f:
            f.write("lines:\n  - recording: legs/a.wav\n    speed: 100\n    baseline_date: 2025\n")
        rc, _, se = run(["survey", "nobase.yaml"], tmp)
        check(rc == 3 and "nobase.yaml:4:20" in se and "baseline_date without a baseline" in se,
              "baseline_date needs a baseline (%d %s)" % (rc, se))
        with open(os.path.join(tmp, "nospeed.yaml"), "w") as f:
            f.write("lines:\n  - recording: legs/a.wav\n")
        rc, _, se = run(["survey", "nospeed.yaml"], tmp)
        check(rc == 3 and "speed" in se, "a line without a speed is refused (%d %s)" % (rc, se))
        with open(os.path.join(tmp, "missing.yaml"), "w") as f:
            f.write(SURVEY.replace("legs/c.wav", "legs/none.wav"))
        rc, _, se = run(["survey", "missing.yaml", "--jsonl", "m.jsonl", "--quiet"], tmp)
        check(rc == 3, "a missing recording exits 3 (got %d)" % rc)
        ml = open(os.path.join(tmp, "m.jsonl")).read().splitlines()
        check(len(ml) == 3 and "error" in json.loads(ml[2]) and "error" not in json.loads(ml[0]),
              "the other recordings are still written, the failed one carries its error")

        # skin_loss: a datasheet value and "estimate" reach se_locate_config.skin_k_s05_per_m
        with open(os.path.join(tmp, "skin.yaml"), "w") as f:
            f.write("lines:\n"
                    "  - recording: legs/a.wav\n    pulse_channel: 2\n    tension: 20 kN\n"
                    "    mass_per_length: 1.25 kg/m\n    skin_loss: 6.6 dB/100 m @ 100 MHz\n"
                    "  - recording: legs/a.wav\n    pulse_channel: 2\n    tension: 20 kN\n"
                    "    mass_per_length: 1.25 kg/m\n    skin_loss: estimate\n")
        rc, _, se = run(["survey", "skin.yaml", "--jsonl", "skin.jsonl", "--quiet"], tmp)
        check(rc == 0, "survey with skin_loss exit 0 (%d %s)" % (rc, se))
        sk = [json.loads(l) for l in open(os.path.join(tmp, "skin.jsonl")).read().splitlines()]
        check(len(sk) == 2, "two skin_loss objects (got %d)" % len(sk))
        if len(sk) == 2:
            # K = alpha_dB_per_m / (20/ln 10 * sqrt(pi f)): the neper-decibel relation (NIST SP 811)
            # with |H| = exp(-K l sqrt(pi f)) (units.h)
            k = 6.6 / 100.0 / (20.0 / math.log(10.0)) / math.sqrt(math.pi * 1e8)
            got = sk[0].get("skin_loss_s05_per_m")
            check(got is not None and abs(got - k) < 1e-9 * k,
                  "skin_loss 6.6 dB/100 m @ 100 MHz is K = %.6g (got %r)" % (k, got))
            check(sk[0].get("skin_loss_estimated") is False and sk[1].get("skin_loss_estimated") is True,
                  "skin_loss: estimate asks for the estimate (%r %r)"
                  % (sk[0].get("skin_loss_estimated"), sk[1].get("skin_loss_estimated")))
            for o, text in zip(sk, ["6.6 dB/100 m @ 100 MHz", "estimate"]):
                rc, so, se = run(["locate", "legs/a.wav", "--pulse-channel", "2", "--tension", "20 kN",
                                  "--mass-per-length", "1.25 kg/m", "--skin-loss", text, "--json", "-"],
                                 tmp)
                check(rc == 0 and strip(o) == json.loads(so) if rc == 0 else False,
                      "survey skin_loss %r equals locate --skin-loss (%d %s)" % (text, rc, se))
        with open(os.path.join(tmp, "badskin.yaml"), "w") as f:
            f.write("lines:\n  - recording: legs/a.wav\n    speed: 100\n    skin_loss: 6.6 dB/100 m\n")
        rc, _, se = run(["survey", "badskin.yaml"], tmp)
        check(rc == 3 and "badskin.yaml:4:16: skin_loss:" in se and "frequency" in se,
              "a skin_loss without its frequency is refused with FILE:LINE:COLUMN, exit 3 (%d %s)" % (rc, se))
        with open(os.path.join(tmp, "badskin2.yaml"), "w") as f:
            f.write("lines:\n  - recording: legs/a.wav\n    speed: 100\n    skin_loss: lots\n")
        rc, _, se = run(["survey", "badskin2.yaml"], tmp)
        check(rc == 3 and "badskin2.yaml:4:16: skin_loss:" in se,
              "a skin_loss that is not a value is refused with FILE:LINE:COLUMN, exit 3 (%d %s)" % (rc, se))

        # taps 3 s apart on a line ringing far longer (source end +0.8, fixed end at 100 m): the
        # summary table notes the overlap
        rc, _, se = run(["simulate", "--pulse", "hann:20ms", "--rate", "2000", "--duration", "12",
                         "--tension", "100 kN", "--mass-per-length", "5 kg/m", "--source-end", "0.8",
                         "--end", "100m:fixed", "--shots", "3", "--interval", "3", "--noise", "0.01",
                         "--seed", "3", "-o", "legs/taps.wav", "--quiet"], tmp)
        check(rc == 0, "simulate taps (%s)" % se)
        with open(os.path.join(tmp, "taps.yaml"), "w") as f:
            f.write("lines:\n  - name: Taps\n    recording: legs/taps.wav\n    pulse_channel: 2\n"
                    "    tension: 100 kN\n    mass_per_length: 5 kg/m\n    source_end: 0.8\n"
                    "  - name: Guy A\n    recording: legs/a.wav\n    pulse_channel: 2\n"
                    "    tension: 20 kN\n    mass_per_length: 1.25 kg/m\n")
        rc, so, se = run(["survey", "taps.yaml"], tmp)
        rows = [l for l in so.splitlines() if l.startswith(" Taps ") or l.startswith(" Guy A ")]
        check(rc == 0 and len(rows) == 2 and rows[0].endswith("no baseline; taps overlap")
              and "taps overlap" not in rows[1],
              "the summary notes the overlapping taps on that line only (%d %r)" % (rc, rows))
    finally:
        shutil.rmtree(tmp, ignore_errors=True)
    print("test_survey: %d of %d checks failed" % (failures, checks) if failures
          else "test_survey: all %d checks passed" % checks)
    return 1 if failures else 0


if __name__ == "__main__":
    sys.exit(main())
