"""locate --stream and --memory-limit: a recording read in blocks gives the same events as the
whole-record run (issue 8: identical results, delays within 1e-9 s), and one over the memory limit
is streamed instead of refused."""
import json
import os
import subprocess
import sys

CLI = os.environ.get("SE_CLI", "./strandecho")
SRC = os.environ.get("SE_SOURCE_DIR", ".")
DEMO = os.path.join(SRC, "fixtures", "demo", "hollin-reach-t1.wav")
ARGS = ["--pulse-channel", "2", "--tension", "100 kN", "--mass-per-length", "5 kg/m", "--json", "-"]
failures = 0


def check(cond, what):
    global failures
    if not cond:
        failures += 1
        print("FAIL:", what)


def run(*extra):
    p = subprocess.run([CLI, "locate", DEMO, *ARGS, *extra], capture_output=True, text=True)
    if p.returncode != 0:
        print(p.stderr)
        sys.exit(1)
    return json.loads(p.stdout), p.stderr


whole, _ = run()
streamed, _ = run("--stream")
limited, note = run("--memory-limit", "1")
check("streaming it" in note, "a recording over --memory-limit is streamed, with a note")
for name, other in (("--stream", streamed), ("--memory-limit 1", limited)):
    check(len(other["events"]) == len(whole["events"]), name + ": same number of events")
    for a, b in zip(whole["events"], other["events"]):
        check(abs(a["delay_s"] - b["delay_s"]) <= 1e-9, "%s: delay %.12g vs %.12g" % (name, a["delay_s"], b["delay_s"]))
        check(a["polarity"] == b["polarity"] and a["class"] == b["class"], name + ": same classes")
    for key in ("noise_level", "threshold", "dead_zone_m", "input_sha256"):
        check(whole[key] == other[key] or abs(whole[key] - other[key]) <= 1e-12 * abs(whole[key]),
              "%s: same %s" % (name, key))
p = subprocess.run([CLI, "locate", DEMO, "--stream", "--tension", "100 kN", "--mass-per-length", "5 kg/m"],
                   capture_output=True, text=True)
check(p.returncode == 2 and p.stderr.count("\n") == 1 and "needs --pulse-channel" in p.stderr,
      "streaming without a pulse channel is refused in one line")
if failures:
    sys.exit(1)
print("stream CLI: all checks passed")
