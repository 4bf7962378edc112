#!/usr/bin/python3
"""strandecho tests: the `speed`, `plan` and `calibrate` commands (issue 3).

- speed: table values (JSON, SI) against the trade and textbook values of shared/REFERENCE.md 3,
  each with its source beside the check; the text table carries a unit on every column and
  --units ft converts lengths and speeds.
- plan: every number against a hand calculation on uniform lines (the rules are the ones printed
  by `strandecho plan --help`), including the Rice threshold of REFERENCE.md 2 and the stacking
  gain 10 log10 N.
- errors: every bad invocation of the three commands gives exactly one stderr line starting
  "strandecho: error:", a non-zero (and the documented) exit code, and no output file.

Run by /usr/bin/python3 with SE_CLI set (CTest does); works in a temporary folder under the cwd."""
import json
import math
import os
import shutil
import subprocess
import sys
import tempfile

CLI = os.environ.get("SE_CLI")
SRC = os.environ.get("SE_SOURCE_DIR", os.path.join(os.path.dirname(__file__), ".."))
LINES = os.path.join(SRC, "fixtures", "lines")
failures = 0
checks = 0


def check(cond, what):
    global failures, checks
    checks += 1
    if not cond:
        failures += 1
        print("FAIL: " + what, file=sys.stderr)
    return cond


def close(got, want, rel, what):
    ok = got is not None and isinstance(got, (int, float)) and not math.isnan(got) and \
        abs(got - want) <= rel * abs(want)
    return check(ok, "%s: got %r, want %r (rel %g)" % (what, got, want, rel))


def run(args, cwd):
    p = subprocess.run([CLI] + args, cwd=cwd, capture_output=True, text=True, timeout=60)
    return p.returncode, p.stdout, p.stderr


def run_json(args, cwd, what):
    rc, so, se = run(args + ["--json", "-"], cwd)
    if not check(rc == 0, "%s: %s -> rc %d, %s" % (what, " ".join(args), rc, se)):
        return None
    try:
        return json.loads(so)
    except ValueError as e:
        check(False, "%s: JSON does not parse (%s): %r" % (what, e, so[:200]))
        return None


def write(cwd, name, text):
    path = os.path.join(cwd, name)
    with open(path, "w") as f:
        f.write(text)
    return name


def expect_error(args, code, cwd, what, json_out=True):
    """One stderr line "strandecho: error: ...", exit code `code`, no out.json left behind."""
    out = os.path.join(cwd, "out.json")
    if os.path.exists(out):
        os.remove(out)
    full = args + ["--json", "out.json"] if json_out and "--json" not in args else args
    rc, so, se = run(full, cwd)
    lines = se.splitlines()
    desc = "%s: %s -> rc %d, stderr %r" % (what, " ".join(full), rc, se)
    check(rc == code and rc != 0, desc + " (want exit %d)" % code)
    check(len(lines) == 1, desc + " (want exactly one stderr line)")
    check(len(lines) >= 1 and lines[0].startswith("strandecho: error: ") and
          len(lines[0]) > len("strandecho: error: ") + 5, desc + " (prefix, says what)")
    check(not os.path.exists(out), desc + " (out.json must not be created)")


UNIFORM = """line: uniform test string
wave: transverse
quantity: velocity
segments:
  - name: a
    length: 50 m
    mass_per_length: 0.01 kg/m
    tension: 100 N
end: fixed
"""

TWO_SPEEDS = """line: two speeds
wave: transverse
quantity: velocity
segments:
  - name: slow
    length: 50 m
    mass_per_length: 0.01 kg/m
    tension: 100 N
  - name: fast
    length: 100 m
    mass_per_length: 0.01 kg/m
    tension: 1600 N
end: fixed
"""


def test_speed(tmp):
    # T = 100 N, mu = 0.01 kg/m: v = 100 m/s, Z = 1 N s/m (REFERENCE.md 3 [calc])
    d = run_json(["speed", "--tension", "100N", "--mass-per-length", "0.01kg/m", "--length", "50m",
                  "--end", "fixed"], tmp, "speed T/mu")
    if d:
        s = d["segments"][0]
        close(s["speed_m_s"], 100.0, 1e-12, "T 100 N, mu 0.01: speed")
        close(s["impedance_near"], 1.0, 1e-12, "T 100 N, mu 0.01: impedance")
        close(s["one_way_s"], 0.5, 1e-12, "50 m at 100 m/s: one way")
        close(s["round_trip_s"], 1.0, 1e-12, "50 m at 100 m/s: round trip")
        e = d["events"][-1]
        close(e["reflection"], -1.0, 1e-12, "fixed end in velocity (REFERENCE.md 1 sign rule)")
        close(e["delay_s"], 1.0, 1e-12, "end delay")
    # Serway & Jewett [mem]: 0.300 kg over 6.00 m, T 19.6 N: v 19.8 m/s, 5.00 m in 0.253 s
    d = run_json(["speed", "--tension", "19.6N", "--mass-per-length", "0.05kg/m", "--length", "5m"],
                 tmp, "speed Serway")
    if d:
        close(d["segments"][0]["speed_m_s"], 19.8, 0.003, "Serway & Jewett cord speed")
        close(d["segments"][0]["one_way_s"], 0.253, 0.002, "Serway & Jewett 5.00 m travel time")
    # Young & Freedman [mem]: 2.00 kg over 80.0 m, T 196 N: v 88.5 m/s
    d = run_json(["speed", "--tension", "196N", "--mass-per-length", "0.025kg/m"], tmp, "speed Y&F")
    if d:
        close(d["segments"][0]["speed_m_s"], 88.5, 0.001, "Young & Freedman rope speed")
        close(d["segments"][0]["one_way_s_per_m"], 1 / 88.54, 0.001, "per-metre time without --length")
    # OC3 spar mooring line (J. Jonkman, NREL/TP-500-47535, 2010): 77.7066 kg/m, EA 384.243 MN,
    # 902.2 m -> axial 2223.7 m/s, round trip 0.8114 s
    d = run_json(["speed", "--axial-stiffness", "384.243MN", "--mass-per-length", "77.7066kg/m",
                  "--length", "902.2m", "--end", "fixed", "--quantity", "force"], tmp, "speed OC3")
    if d:
        close(d["segments"][0]["speed_m_s"], 2223.7, 5e-5, "OC3 axial speed")
        close(d["round_trip_s"], 0.8114, 1e-4, "OC3 round trip")
        check(d["wave"] == "longitudinal", "OC3: longitudinal waves from --axial-stiffness")
        close(d["events"][-1]["reflection"], 1.0, 1e-12, "fixed end in force is upright (+1)")
    # OC4 semi mooring line (A. Robertson et al., NREL/TP-5000-60601, 2014): 113.35 kg/m,
    # EA 753.6 MN -> axial 2578.5 m/s
    d = run_json(["speed", "--axial-stiffness", "753.6MN", "--mass-per-length", "113.35kg/m",
                  "--length", "835.5m"], tmp, "speed OC4")
    if d:
        close(d["segments"][0]["speed_m_s"], 2578.5, 5e-5, "OC4 axial speed")
    # studless chain, EA 85.6e9 d^2 N and mass 20.0e3 d^2 kg/m (d in m): axial ~2069 m/s for any d
    # (DNV-OS-E301 via NREL open mooring property coefficients [pub; calc]); d = 76 mm
    dd = 0.076
    d = run_json(["speed", "--axial-stiffness", "%.6fN" % (85.6e9 * dd * dd),
                  "--mass-per-length", "%.6fkg/m" % (20.0e3 * dd * dd)], tmp, "speed chain EA")
    if d:
        close(d["segments"][0]["speed_m_s"], 2069.0, 5e-4, "chain axial speed")
    # steel bar: sqrt(210e9 / 7850) = 5172 m/s (EN 1993-1-1 E = 210 GPa [mem]), as EA and mu of a
    # 1 cm^2 section
    d = run_json(["speed", "--axial-stiffness", "21MN", "--mass-per-length", "0.785kg/m"], tmp,
                 "speed steel")
    if d:
        close(d["segments"][0]["speed_m_s"], 5172.0, 1e-4, "steel bar speed")
    # VF 0.66: 197.863 m/us, a 1 us round trip = 98.93 m (REFERENCE.md 3 [calc from SI c]);
    # 50 -> 75 ohm: Gamma = +0.200 in voltage, two-way transmission 1 - 0.04 (REFERENCE.md 3 [calc])
    cab = write(tmp, "cable.yaml", """line: test cable
wave: electrical
quantity: voltage
segments:
  - name: feeder
    length: 98.93 m
    velocity_factor: 0.66
    impedance: 50 ohm
  - name: tail
    length: 10 m
    velocity_factor: 0.66
    impedance: 75 ohm
end: open
""")
    d = run_json(["speed", "--line", cab], tmp, "speed cable")
    if d:
        close(d["segments"][0]["speed_m_s"], 197.863e6, 2e-6, "VF 0.66 speed")
        close(d["segments"][0]["round_trip_s"], 1.0e-6, 5e-5, "98.93 m at VF 0.66: 1 us round trip")
        j = [e for e in d["events"] if e["type"] == "junction"]
        if check(len(j) == 1, "cable: one junction"):
            close(j[0]["reflection"], 0.2, 1e-12, "50 -> 75 ohm reflection")
        end = d["events"][-1]
        close(end["transmission"], 0.96, 1e-12, "two-way transmission through the 50/75 junction")
        close(end["amplitude"], 0.96, 1e-12, "open end seen through the junction")
    # junction mu -> 4 mu, same T: R = -1/3 in displacement, and the end behind it sees
    # 1 - R^2 = 8/9 two ways (REFERENCE.md 3, textbook exercise [calc])
    jl = write(tmp, "junction.yaml", """line: mass step
wave: transverse
quantity: displacement
segments:
  - name: light
    length: 10 m
    mass_per_length: 1 kg/m
    tension: 100 N
  - name: heavy
    length: 10 m
    mass_per_length: 4 kg/m
    tension: 100 N
end: free
""")
    d = run_json(["speed", "--line", jl], tmp, "speed junction")
    if d:
        close(d["events"][0]["reflection"], -1.0 / 3.0, 1e-12, "mu -> 4 mu reflection")
        close(d["events"][1]["transmission"], 8.0 / 9.0, 1e-12, "mu -> 4 mu two-way transmission")
        close(d["events"][1]["amplitude"], 8.0 / 9.0, 1e-12, "free end (+1) behind the step")
        close(d["segments"][1]["speed_m_s"], 5.0, 1e-12, "sqrt(100 / 4)")
    # guy wire by pulse (REFERENCE.md 3, amateur tower practice, mailing-list report, 2011 [pub,
    # informal]): 100 ft, 0.2264 lb/ft, 500 lbf -> v 81.3 m/s, round trip 0.75 s
    guy = os.path.join(LINES, "guy-wire-us.yaml")
    d = run_json(["speed", "--line", guy], tmp, "speed guy")
    if d:
        close(d["segments"][0]["speed_m_s"], 81.3, 0.002, "guy wire speed")
        close(d["round_trip_s"], 0.75, 0.002, "guy wire round trip")
    rc, so, se = run(["speed", "--line", guy, "--units", "ft"], tmp)
    check(rc == 0 and "length (ft)" in so and "speed (ft/s)" in so and "100.000" in so and
          ("%.6g" % (81.3 / 0.3048))[:4] in so, "speed --units ft table: %s" % so)
    # the kestrel leg: added mass in water mu_eff = mu + C_a rho_w pi D^2 / 4 (Bureau Veritas
    # NR493, C_a = 1, rho_w = 1025 kg/m^3), v = sqrt(T / mu_eff), Z = mu_eff v [calc]
    kes = os.path.join(LINES, "kestrel-leg3.yaml")
    d = run_json(["speed", "--line", kes], tmp, "speed kestrel")
    if d:
        mu = 85.0 + 1025.0 * math.pi * 0.076 ** 2 / 4.0
        s = d["segments"][0]
        close(s["mu_eff_kg_m"], mu, 1e-12, "upper chain added mass")
        close(s["speed_m_s"], math.sqrt(650e3 / mu), 1e-12, "upper chain speed")
        close(s["impedance_near"], math.sqrt(650e3 * mu), 1e-12, "upper chain impedance")
        check(d["segments"][2]["hanging"] and
              d["segments"][2]["speed_near_m_s"] != d["segments"][2]["speed_far_m_s"],
              "hanging ground chain: speed varies along it")
        names = [e["name"] for e in d["events"]]
        check(names[0] == "upper shackle" and names[-1] == "end" and
              "upper chain / polyester insert" in names, "kestrel events: %s" % names)
        arr = [s["arrival_s"] for s in d["segments"]]
        close(arr[-1], d["round_trip_s"], 1e-12, "arrivals add up to the round trip")
    rc, so, se = run(["speed", "--line", kes], tmp)
    for col in ("start (m)", "length (m)", "speed (m/s)", "+/- (%)", "impedance (N s/m)",
                "one-way (ms)", "round trip (ms)", "arrival (ms)", "distance (m)", "delay (ms)"):
        check(col in so, "speed table has a unit on column %r" % col)
    check("fixed-like" in so and "free-like" in so, "speed table classes the junctions")


def test_plan(tmp):
    u = write(tmp, "uniform.yaml", UNIFORM)
    d = run_json(["plan", "--line", u, "--resolution", "0.5m"], tmp, "plan uniform")
    if d:
        # hand calculation, rules from `plan --help`: v = 100 m/s, R = 0.5 m
        tau = 2 * 0.5 / 100.0                        # 10 ms
        close(d["pulse_length_s"], tau, 1e-12, "pulse tau = 2 R / v")
        check(d["pulse"] == "hann:10ms", "pulse spec %r" % d["pulse"])
        close(d["pulse_bandwidth_hz"], 2 / tau, 1e-12, "Hann bandwidth 2 / tau")
        close(d["rate_for_bandwidth_hz"], 10 * 2 / tau, 1e-12, "fs >= 10 B")
        close(d["rate_for_quantum_hz"], 10 * 100.0 / (2 * 0.5), 1e-12, "v / (2 fs) <= R / 10")
        close(d["rate_hz"], 2000.0, 1e-12, "rate: 2 kHz")
        close(d["sampling_quantum_m"], 100.0 / (2 * 2000.0), 1e-12, "sampling quantum")
        rec = 1.1 * 2 * 1.0 + 3 * tau                # 2.23 s
        close(d["record_s"], rec, 1e-12, "record = 1.1 x 2 x round trip + 3 tau")
        check(abs(d["record_samples"] - rec * 2000) <= 1, "record samples %r" % d["record_samples"])
        close(d["dead_zone_m"], 100.0 * tau / 2, 1e-12, "dead zone v tau / 2")
        # Hann of length tau: beta^2 = int s'^2 / int s^2 = 4 pi^2 / (3 tau^2) [calc], per sample
        beta = 2 * math.pi / (math.sqrt(3) * tau * 2000.0)
        close(d["rms_bandwidth_rad_per_sample"], beta, 0.01, "RMS bandwidth of the Hann pulse")
        # Rice (S.O. Rice, BSTJ 1944-45; REFERENCE.md 2): N beta / pi exp(-k^2 / 2) = false alarms
        k = math.sqrt(2 * math.log(d["record_samples"] * beta / (math.pi * 0.01)))
        close(d["threshold_sigma"], k, 0.002, "Rice threshold")
        close(d["snr_needed_db"], 20 * math.log10(k) + 3.0, 0.002, "needed SNR = 20 log10 k + 3 dB")
        check(d["weakest"] == "end" and d["shots"] == 1, "30 dB single shot sees the end: %r %r"
              % (d["weakest"], d["shots"]))
        kk = d["threshold_sigma"]
    d = run_json(["plan", "--line", u, "--resolution", "0.5m", "--snr-db", "5"], tmp, "plan 5 dB")
    if d:
        need = 20 * math.log10(d["threshold_sigma"]) + 3.0
        want = math.ceil(10 ** ((need - 5.0) / 10.0))   # stacking gains 10 log10 N (REFERENCE.md 2)
        check(d["shots"] == want, "shots for 5 dB: got %r, want %r" % (d["shots"], want))
        check(10 * math.log10(d["shots"]) + 5.0 >= need > 10 * math.log10(d["shots"] - 1) + 5.0,
              "the fewest shots that reach the needed SNR")
    d = run_json(["plan", "--line", u, "--resolution", "0.5m", "--false-alarms", "1"], tmp,
                 "plan fa 1")
    if d:
        check(d["threshold_sigma"] < kk, "more false alarms allowed -> lower threshold")
    t = write(tmp, "two.yaml", TWO_SPEEDS)
    d = run_json(["plan", "--line", t, "--resolution", "0.5m"], tmp, "plan two speeds")
    if d:
        # slowest 100 m/s sets tau = 10 ms; fastest sqrt(1600 / 0.01) = 400 m/s sets
        # fs >= 10 x 400 / (2 x 0.5) = 4 kHz -> 5 kHz (1-2-5 rounding); round trip 2 (0.5 + 0.25) s
        close(d["slowest_speed_m_s"], 100.0, 1e-12, "slowest speed")
        close(d["fastest_speed_m_s"], 400.0, 1e-12, "fastest speed")
        close(d["pulse_length_s"], 0.01, 1e-12, "tau from the slowest segment")
        close(d["rate_for_quantum_hz"], 4000.0, 1e-12, "quantum rule at the fastest segment")
        close(d["rate_hz"], 5000.0, 1e-12, "rate rounded up to 5 kHz")
        close(d["record_s"], 1.1 * 2 * 1.5 + 0.03, 1e-12, "record")
        close(d["dead_zone_m"], 0.5, 1e-12, "dead zone at the sensor's speed")
        # Z = sqrt(T mu): 1 -> 4 N s/m: r = (1 - 4) / (1 + 4) = -0.6 in velocity; the end (-1)
        # behind it arrives at -(1 - 0.36) = -0.64 [calc]
        ev = d["events"]
        close(ev[0]["amplitude"], -0.6, 1e-12, "junction amplitude")
        close(ev[1]["amplitude"], -0.64, 1e-12, "end amplitude after transmission losses")
        check(d["weakest"] == "slow / fast", "weakest echo: %r" % d["weakest"])
        close(d["weakest_snr_db"], 30.0 + 20 * math.log10(0.6), 1e-9, "weakest single-shot SNR")
    rc, so, se = run(["plan", "--line", t, "--resolution", "0.5m"], tmp)
    check(rc == 0 and "hann:10ms" in so and "5kHz" in so and "dead zone" in so and
          "10 log10 N" in so and "strandecho simulate --line" in so, "plan text: %s" % so)
    rc, so, se = run(["plan", "--line", os.path.join(LINES, "kestrel-leg3.yaml"), "--resolution",
                      "0.5m", "--units", "ft"], tmp)
    check(rc == 0 and "distance (ft)" in so and "4330.709" in so, "plan --units ft: %s" % so)


def test_errors(tmp):
    u = write(tmp, "uniform.yaml", UNIFORM)
    write(tmp, "bad.yaml", "line: x\nwave: transverse\nquantity: velocity\nsegments:\n"
          "  - name: a\n    length: 10\n    tension: 1 kN\n    mass_per_length: 1 kg/m\nend: fixed\n")
    write(tmp, "notyaml.yaml", "line: [unclosed\nwave: transverse\n")
    rc, so, se = run(["simulate", "--line", u, "--pulse", "hann:10ms", "--rate", "2kHz",
                      "--duration", "1.5s", "--noise", "1e-3", "-o", "rec.wav", "--quiet"], tmp)
    check(rc == 0, "simulate rec.wav: %s" % se)
    for cmd in ("speed", "plan", "calibrate"):
        rc, so, se = run([cmd, "--help"], tmp)
        check(rc == 0 and so.startswith("usage: strandecho " + cmd), "%s --help" % cmd)
    nodir = os.path.join(tmp, "no-such-dir", "out.json")
    sp = ["--tension", "100N", "--mass-per-length", "0.01kg/m"]
    # speed
    expect_error(["speed"], 2, tmp, "speed: no speed")
    expect_error(["speed", "--bogus"], 2, tmp, "speed: unknown option")
    expect_error(["speed", "--speed"], 2, tmp, "speed: missing value", json_out=False)
    expect_error(["speed", "--tension", "100N"], 2, tmp, "speed: tension without mass")
    expect_error(["speed"] + sp + ["--length", "-5m"], 2, tmp, "speed: negative length")
    expect_error(["speed"] + sp + ["--length", "5 parsecs"], 2, tmp, "speed: bad length unit")
    expect_error(["speed"] + sp + ["--end", "wobbly"], 2, tmp, "speed: bad end")
    expect_error(["speed"] + sp + ["--units", "yd"], 2, tmp, "speed: bad units")
    expect_error(["speed"] + sp + ["--quantity", "voltage"], 2, tmp, "speed: voltage on a string")
    expect_error(["speed", "--line", u, "--speed", "100"], 2, tmp, "speed: line and speed")
    expect_error(["speed", "--line", "missing.yaml"], 3, tmp, "speed: missing line file")
    # a value without its unit is an option-value error (2), as locate --line reports it
    # (tests/test_bad_inputs.py); a file that is not YAML is a malformed input (3)
    expect_error(["speed", "--line", "bad.yaml"], 2, tmp, "speed: line file without a unit")
    expect_error(["speed", "--line", "notyaml.yaml"], 3, tmp, "speed: YAML syntax error")
    expect_error(["speed", "--line", u, "--json", u], 2, tmp, "speed: JSON over the line file",
                 json_out=False)
    expect_error(["speed", "--line", u, "--json", nodir], 5, tmp, "speed: unwritable JSON",
                 json_out=False)
    # plan
    expect_error(["plan", "--resolution", "0.5m"], 2, tmp, "plan: no line")
    expect_error(["plan", "--line", u], 2, tmp, "plan: no resolution")
    expect_error(["plan", "--line", u, "--resolution", "0m"], 2, tmp, "plan: zero resolution")
    expect_error(["plan", "--line", u, "--resolution", "fine"], 2, tmp, "plan: resolution text")
    expect_error(["plan", "--line", u, "--resolution", "80m"], 2, tmp, "plan: resolution > length")
    expect_error(["plan", "--line", u, "--resolution", "0.5m", "--snr-db", "lots"], 2, tmp,
                 "plan: bad SNR")
    expect_error(["plan", "--line", u, "--resolution", "0.5m", "--false-alarms", "0"], 2, tmp,
                 "plan: zero false alarms")
    expect_error(["plan", "--line", u, "--resolution", "0.5m", "--units", "yd"], 2, tmp,
                 "plan: bad units")
    expect_error(["plan", "--line", u, "--resolution", "0.5m", "--speed", "100"], 2, tmp,
                 "plan: unknown option")
    expect_error(["plan", "--line", "missing.yaml", "--resolution", "0.5m"], 3, tmp,
                 "plan: missing line")
    expect_error(["plan", "--line", "bad.yaml", "--resolution", "0.5m"], 2, tmp, "plan: bad line")
    expect_error(["plan", "--line", "notyaml.yaml", "--resolution", "0.5m"], 3, tmp,
                 "plan: YAML syntax error")
    expect_error(["plan", "--line", u, "--resolution", "1e-7m"], 4, tmp, "plan: impossible record")
    expect_error(["plan", "--line", u, "--resolution", "0.5m", "--json", nodir], 5, tmp,
                 "plan: unwritable JSON", json_out=False)
    # calibrate
    base = ["calibrate", "rec.wav", "--pulse-channel", "2"]
    expect_error(["calibrate"], 2, tmp, "calibrate: no recording")
    expect_error(base + sp, 2, tmp, "calibrate: no known distance")
    expect_error(base + sp + ["--known-distance", "far"], 2, tmp, "calibrate: bad distance")
    expect_error(base + sp + ["--known-distance", "-3m"], 2, tmp, "calibrate: negative distance")
    expect_error(base + sp + ["--known-distance", "50m", "--distance-uncertainty", "-1m"], 2, tmp,
                 "calibrate: negative distance uncertainty")
    expect_error(base + ["--known-distance", "50m"], 2, tmp, "calibrate: no speed, no line")
    expect_error(base + sp + ["--feature", "end"], 2, tmp, "calibrate: feature without line")
    expect_error(base + sp + ["--known-distance", "50m", "--segment", "a"], 2, tmp,
                 "calibrate: segment without line")
    expect_error(base + ["--line", u, "--feature", "nothing here"], 2, tmp,
                 "calibrate: unknown feature")
    expect_error(base + ["--line", u, "--feature", "end", "--segment", "zz"], 2, tmp,
                 "calibrate: unknown segment")
    expect_error(base + ["--line", u, "--known-distance", "80m"], 2, tmp,
                 "calibrate: distance beyond the line")
    expect_error(base + ["--line", u, "--feature", "end", "--speed", "100"], 2, tmp,
                 "calibrate: line and speed")
    expect_error(["calibrate", "rec.wav", "--pulse-channel", "5", "--line", u, "--feature", "end"],
                 2, tmp, "calibrate: no such pulse channel")
    expect_error(base + ["--pulse", "hann:10ms", "--line", u, "--feature", "end"], 2, tmp,
                 "calibrate: two references")
    expect_error(base + sp + ["--known-distance", "50m", "--bogus"], 2, tmp, "calibrate: unknown")
    expect_error(["calibrate", "missing.wav", "--line", u, "--feature", "end"], 3, tmp,
                 "calibrate: missing recording")
    expect_error(base + sp + ["--known-distance", "500m"], 4, tmp,
                 "calibrate: reflector beyond the record")
    expect_error(base + ["--line", u, "--feature", "end", "--json", nodir], 5, tmp,
                 "calibrate: unwritable JSON", json_out=False)


def main():
    if not CLI or not os.path.exists(CLI):
        print("SE_CLI not set or missing: skipped", file=sys.stderr)
        return 77
    tmp = tempfile.mkdtemp(prefix="legcli-", dir=os.getcwd())
    try:
        test_speed(tmp)
        test_plan(tmp)
        test_errors(tmp)
    finally:
        shutil.rmtree(tmp, ignore_errors=True)
    print("test_leg_cli: %d checks, %d failures" % (checks, failures))
    return 1 if failures else 0


if __name__ == "__main__":
    sys.exit(main())
