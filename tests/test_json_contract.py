#!/usr/bin/python3
"""strandecho tests: the JSON contract of `locate --json` (issue 2, docs/json.md). Every event has
delay_s, distance_m, distance_uncertainty_m, polarity, impedance, class, reflection, snr_db and
multiple; the top level has the input file, its SHA-256, rate, channel, speed, quantity, dead zone,
noise level, threshold and tool version. The SHA-256 is checked against Python's hashlib (an
outside implementation of FIPS 180-4), and two runs must write byte-identical JSON.

Run by /usr/bin/python3 with SE_CLI set; works in a temporary folder under the cwd."""
import hashlib
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


def run(args, cwd):
    p = subprocess.run([CLI] + args, cwd=cwd, capture_output=True, timeout=120)
    return p.returncode, p.stdout, p.stderr.decode(errors="replace")


def is_num(v):
    return isinstance(v, (int, float)) and not isinstance(v, bool) and math.isfinite(v)


EVENT_KEYS = {
    "delay_s": is_num, "distance_m": is_num, "distance_uncertainty_m": is_num,
    "polarity": lambda v: v in ("upright", "inverted"),
    "impedance": lambda v: v in ("increase", "decrease"),
    "class": lambda v: v in ("fixed-like", "free-like", "open-like", "short-like"),
    "reflection": is_num, "snr_db": is_num, "multiple": lambda v: isinstance(v, bool),
    "predicted_multiple": is_num,
    "previous_shot": lambda v: v is None or (isinstance(v, int) and not isinstance(v, bool) and v >= 1),
}
TOP_KEYS = {
    "input_file": lambda v: isinstance(v, str), "input_sha256": lambda v: isinstance(v, str),
    "rate_hz": is_num, "channel": lambda v: isinstance(v, int) and not isinstance(v, bool),
    "speed_m_s": is_num, "quantity": lambda v: isinstance(v, str), "dead_zone_m": is_num,
    "noise_level": is_num, "threshold": is_num, "tool_version": lambda v: isinstance(v, str),
    "events": lambda v: isinstance(v, list),
    "ring_down_s": lambda v: v is None or (is_num(v) and v >= 0),
    "shot_interval_s": lambda v: is_num(v) and v >= 0,
    "shots_overlap": lambda v: isinstance(v, bool),
    "attenuation_method": lambda v: v in (None, "given", "known reflector", "end multiples"),
    "attenuation_repeats": lambda v: isinstance(v, int) and not isinstance(v, bool) and v >= 0,
}


def documented_keys():
    """The keys of the tables of docs/json.md (first column, in backquotes)."""
    src = os.environ.get("SE_SOURCE_DIR")
    if not src:
        return None
    keys = set()
    with open(os.path.join(src, "docs", "json.md"), encoding="utf-8") as f:
        for line in f:
            if line.startswith("| `"):
                keys.add(line.split("`")[1])
    return keys


def contract(doc, path, what, speed, quantity, electrical):
    for k, ok in TOP_KEYS.items():
        if check(k in doc, "%s: top-level key %s" % (what, k)):
            check(ok(doc[k]), "%s: %s has the right type (%r)" % (what, k, doc[k]))
    with open(path, "rb") as f:
        sha = hashlib.sha256(f.read()).hexdigest()
    check(doc.get("input_sha256") == sha,
          "%s: input_sha256 %r equals hashlib.sha256 %s" % (what, doc.get("input_sha256"), sha))
    check(doc.get("input_file") == os.path.basename(path), "%s: input_file as given" % what)
    check(doc.get("rate_hz") == 48000.0 or doc.get("rate_hz") == 1e9, "%s: rate" % what)
    check(doc.get("channel") == 1, "%s: channel 1" % what)
    check(is_num(doc.get("speed_m_s")) and abs(doc["speed_m_s"] - speed) <= 1e-9 * speed,
          "%s: speed_m_s %r want %r" % (what, doc.get("speed_m_s"), speed))
    check(doc.get("quantity") == quantity, "%s: quantity %r" % (what, doc.get("quantity")))
    check(is_num(doc.get("threshold")) and is_num(doc.get("noise_level")) and
          doc["threshold"] > doc["noise_level"] > 0, "%s: threshold above the noise level" % what)
    check(is_num(doc.get("dead_zone_m")) and doc["dead_zone_m"] > 0, "%s: dead zone > 0" % what)
    evs = doc.get("events", [])
    doc_keys = documented_keys()
    if doc_keys is not None:  # docs/json.md stays true: every key written is described there
        for k in doc:
            check(k in doc_keys, "%s: top-level key %s is in docs/json.md" % (what, k))
        for e in evs:
            for k in e:
                check(k in doc_keys, "%s: event key %s is in docs/json.md" % (what, k))
    check(len(evs) >= 2, "%s: at least the two reflectors (%d events)" % (what, len(evs)))
    for i, e in enumerate(evs):
        for k, ok in EVENT_KEYS.items():
            if check(k in e, "%s: event %d has %s" % (what, i, k)):
                check(ok(e[k]), "%s: event %d %s = %r" % (what, i, k, e[k]))
        if all(is_num(e.get(k)) for k in ("delay_s", "distance_m")):
            # d = v t / 2 (REFERENCE.md 1, "Delay to distance")
            check(abs(e["distance_m"] - 0.5 * speed * e["delay_s"]) <= 1e-9 * max(1.0, e["distance_m"]),
                  "%s: event %d distance = v t / 2" % (what, i))
        if e.get("class") is not None:
            words = ("open-like", "short-like") if electrical else ("fixed-like", "free-like")
            check(e["class"] in words, "%s: event %d class word %s for the line kind" % (what, i, e["class"]))
            inc = e.get("impedance") == "increase"
            check(e["class"] == words[0 if inc else 1], "%s: event %d class agrees with impedance" % (what, i))
        if i > 0 and is_num(e.get("delay_s")) and is_num(evs[i - 1].get("delay_s")):
            check(e["delay_s"] >= evs[i - 1]["delay_s"], "%s: events sorted by delay" % what)
        if is_num(e.get("distance_m")) and is_num(doc.get("dead_zone_m")):
            check(e["distance_m"] >= doc["dead_zone_m"], "%s: event %d beyond the dead zone" % (what, i))


def main():
    if not CLI or not os.path.exists(CLI):
        print("SE_CLI not set or missing: skipped", file=sys.stderr)
        return 77
    tmp = tempfile.mkdtemp(prefix="json-", dir=os.getcwd())
    try:
        return body(tmp)
    finally:
        shutil.rmtree(tmp, ignore_errors=True)


def body(tmp):
    rc, so, se = run(["version"], tmp)
    version = so.decode().split()[-1] if rc == 0 else None
    # a tether (141.4 m/s, velocity) and a cable (VF 0.66 of c = 299792458 m/s exactly, BIPM SI
    # brochure 9th ed.; voltage by default with --velocity-factor)
    cases = [
        ("tether.wav", ["--pulse", "hann:4ms", "--rate", "48kHz", "--duration", "0.8s", "--speed", "141.4",
                        "--reflector", "20m:-0.3", "--reflector", "45m:0.25"],
         ["--speed", "141.4"], 141.4, "velocity", False),
        ("cable.wav", ["--pulse", "hann:20ns", "--rate", "1GHz", "--duration", "1.2us",
                       "--velocity-factor", "0.66", "--reflector", "30m:0.3", "--reflector", "70m:-0.3"],
         ["--velocity-factor", "0.66"], 0.66 * 299792458.0, "voltage", True),
    ]
    for name, simargs, speedargs, speed, quantity, electrical in cases:
        rc, so, se = run(["simulate"] + simargs + ["--noise", "1e-3", "--seed", "5", "-o", name,
                                                   "--quiet"], tmp)
        if not check(rc == 0, "simulate %s (rc %d, %s)" % (name, rc, se)):
            continue
        args = ["locate", name, "--pulse-channel", "2"] + speedargs
        rc1, _, se1 = run(args + ["--json", "a.json"], tmp)
        rc2, _, se2 = run(args + ["--json", "b.json"], tmp)
        rc3, out3, se3 = run(args + ["--json", "-"], tmp)
        if not check(rc1 == 0 and rc2 == 0 and rc3 == 0,
                     "%s: locate runs (%d %d %d: %s)" % (name, rc1, rc2, rc3, se1 + se3)):
            continue
        with open(os.path.join(tmp, "a.json"), "rb") as f:
            a = f.read()
        with open(os.path.join(tmp, "b.json"), "rb") as f:
            b = f.read()
        check(a == b, "%s: two runs write byte-identical JSON" % name)
        check(out3 == a, "%s: --json - prints the same bytes as --json FILE" % name)
        check(a.endswith(b"\n"), "%s: JSON ends with a newline" % name)
        try:
            doc = json.loads(a.decode("utf-8"))
        except ValueError as e:
            check(False, "%s: valid JSON (%s)" % (name, e))
            continue
        check(isinstance(doc, dict), "%s: top level is an object" % name)
        contract(doc, os.path.join(tmp, name), name, speed, quantity, electrical)
        check(version is not None and doc.get("tool_version") == version,
              "%s: tool_version %r equals `strandecho version` %r" % (name, doc.get("tool_version"), version))
        # NaN / Infinity are not JSON (RFC 8259): the strict parser must accept the text
        try:
            json.loads(a.decode("utf-8"), parse_constant=lambda c: (_ for _ in ()).throw(ValueError(c)))
            check(True, "no NaN/Infinity")
        except ValueError as e:
            check(False, "%s: JSON holds a non-standard constant %s" % (name, e))
    # another channel number is reported as given
    rc, _, se = run(["locate", "tether.wav", "--channel", "1", "--pulse-channel", "2", "--speed",
                     "141.4", "--json", "c.json"], tmp)
    if check(rc == 0, "locate --channel 1 (%s)" % se):
        with open(os.path.join(tmp, "c.json")) as f:
            check(json.load(f).get("channel") == 1, "channel echoed")

    if failures:
        print("test_json_contract.py: %d of %d checks failed" % (failures, checks), file=sys.stderr)
        return 1
    print("test_json_contract.py: all %d checks passed" % checks)
    return 0


if __name__ == "__main__":
    sys.exit(main())
