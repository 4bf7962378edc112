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
check(p.returncode == 2 and p.stderr.count("\n") == 1 and "needs --pulse-channel or --pulse" in p.stderr,
      "streaming with the direct arrival as its own reference is refused in one line")
# Repeated taps (issue 8: stacking on the stream): six taps 2 s apart on a line that rings for
# longer (far end fixed at 100 m, source end fixed), streamed and whole: the same shots found and
# used, the same gain and interval, the same events (delays within 1e-9 s) and multiple labels.
TAPS = os.path.join(os.environ.get("SE_BINARY_DIR", "."), "test_cli_stream_taps.wav")
p = subprocess.run([CLI, "simulate", "--pulse", "hann:20ms", "--rate", "48kHz", "--duration", "12s",
                    "--tension", "100 kN", "--mass-per-length", "5 kg/m", "--end", "100m:fixed",
                    "--source-end", "0.8", "--noise", "0.01", "--shots", "6", "--interval", "2s",
                    "-o", TAPS, "--quiet"], capture_output=True, text=True)
check(p.returncode == 0, "simulate --shots: " + p.stderr)
if p.returncode == 0:
    def taps(*extra):
        q = subprocess.run([CLI, "locate", TAPS, "--pulse-channel", "2", "--tension", "100 kN",
                            "--mass-per-length", "5 kg/m", "--source-end", "0.8", "--json", "-", *extra],
                           capture_output=True, text=True)
        if q.returncode != 0:
            print(q.stderr)
            sys.exit(1)
        return json.loads(q.stdout)
    tw, ts = taps(), taps("--stream")
    check(tw["shots_found"] == 6 and tw["shots_used"] >= 2, "whole: %s of %s shots used" % (tw["shots_used"], tw["shots_found"]))
    for key in ("shots_found", "shots_used", "shot_interval_s", "shots_overlap"):
        check(tw[key] == ts[key], "taps --stream: same %s (%s, %s)" % (key, tw[key], ts[key]))
    check(abs(tw["stack_gain_db"] - ts["stack_gain_db"]) <= 1e-12 * abs(tw["stack_gain_db"]),
          "taps --stream: same gain")
    check(len(tw["events"]) == len(ts["events"]), "taps --stream: same number of events")
    for a, b in zip(tw["events"], ts["events"]):
        check(abs(a["delay_s"] - b["delay_s"]) <= 1e-9, "taps --stream: delay %.12g vs %.12g" % (a["delay_s"], b["delay_s"]))
        check(a["class"] == b["class"] and a.get("multiple") == b.get("multiple")
              and a.get("previous_shot") == b.get("previous_shot"), "taps --stream: same labels")
    os.remove(TAPS)
# A shape as the reference (no pulse channel): four taps 4 s apart, stacked on the response's
# own direct arrivals whole and streamed, and over the memory limit streamed too; one tap alone.
for shots, dur in ((4, "16s"), (1, "4s")):
    SHAPE = os.path.join(os.environ.get("SE_BINARY_DIR", "."), "test_cli_stream_shape.wav")
    p = subprocess.run([CLI, "simulate", "--pulse", "hann:2ms", "--rate", "20kHz", "--duration", dur,
                        "--speed", "141.42", "--reflector", "60:-0.3", "--end", "150:-0.5",
                        "--source-end", "0.3", "--shots", str(shots), "--interval", "4s",
                        "--noise", "0.002", "-o", SHAPE, "--quiet"], capture_output=True, text=True)
    check(p.returncode == 0, "simulate for --pulse: " + p.stderr)
    if p.returncode != 0:
        continue

    def shape(*extra):
        q = subprocess.run([CLI, "locate", SHAPE, "--pulse", "hann:2ms", "--speed", "141.42",
                            "--json", "-", *extra], capture_output=True, text=True)
        if q.returncode != 0:
            print(q.stderr)
            sys.exit(1)
        return json.loads(q.stdout), q.stderr
    (sw, _), (ss, _), (sl, snote) = shape(), shape("--stream"), shape("--memory-limit", "1")
    check("streaming it" in snote, "--pulse: over --memory-limit streamed, with a note")
    check(sw["shots_found"] == shots and sw["shots_used"] == shots,
          "--pulse whole: %d of %d taps stacked (%s)" % (sw["shots_used"], shots, sw["shots_found"]))
    for name, other in (("--pulse --stream", ss), ("--pulse --memory-limit 1", sl)):
        for key in ("shots_found", "shots_used", "shot_interval_s", "reference", "noise_level",
                    "threshold"):
            check(sw.get(key) == other.get(key), "%s: same %s (%s, %s)" % (name, key, sw.get(key),
                                                                          other.get(key)))
        check(len(other["events"]) == len(sw["events"]), name + ": same number of events")
        for a, b in zip(sw["events"], other["events"]):
            check(a["delay_s"] == b["delay_s"] and a.get("multiple") == b.get("multiple"),
                  "%s: delay %.12g vs %.12g" % (name, a["delay_s"], b["delay_s"]))
    os.remove(SHAPE)
if failures:
    sys.exit(1)
print("stream CLI: all checks passed")
