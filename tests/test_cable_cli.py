"""A lossy cable from the command line: `strandecho simulate --line` of the worked feeder example
(fixtures/lines/coax-feeder-skin.yaml: three segments, datasheet skin losses, open end at 132 m)
then `strandecho locate --line` of the same file, which takes the file's skin loss (the
length-weighted mean K) without being told.

Checks (tolerances are common practice, no source):
- with the file's loss: one event, the open end, upright, matched to the line's `end`, within its
  stated interval of 132 m, skin-corrected, the JSON's K equal to the file's mean K (4.895e-7
  s^0.5/m as the fixture's comment works out), the split pieces counted in `skin_explained`;
- `--skin-loss 0` turns it off: the end is then seen late (more than 5 cm) and weak, in pieces;
- the zero-reflection junctions are "not seen" below the threshold, never MISSING (terminal and
  report), and the report states the skin-effect loss;
- the table gives cable delays in microseconds.
"""
import json
import os
import shutil
import sys
import tempfile

from clitest import SRC, Checks, have_cli, run

LINE = os.path.join(SRC, "fixtures", "lines", "coax-feeder-skin.yaml")
check = Checks("test_cable_cli")


def main():
    if not have_cli():
        print("SE_CLI not set: skipped")
        return 77
    tmp = tempfile.mkdtemp(prefix="cable-", dir=os.getcwd())
    try:
        rc, _, se = run(["simulate", "--quiet", "--line", LINE, "--pulse", "gauss:8ns", "--rate", "1 GHz",
                         "--duration", "2 us", "--noise", "0.002", "-o", "feed.wav"], tmp)
        if not check(rc == 0, "simulate exits 0 (%d %s)" % (rc, se)):
            return 1
        rc, out, se = run(["locate", "feed.wav", "--pulse-channel", "2", "--line", LINE, "--json", "f.json",
                           "--report", "f.html"], tmp)
        if not check(rc == 0, "locate exits 0 (%d %s)" % (rc, se)):
            return 1
        with open(os.path.join(tmp, "f.json")) as f:
            res = json.load(f)
        evs = res["events"]
        check(len(evs) == 1, "one event (%d)" % len(evs))
        if evs:
            e = evs[0]
            check(e["expected"] == "end" and e["polarity"] == "upright", "the open end (%s)" % e)
            check(abs(e["distance_m"] - 132.0) <= e["distance_uncertainty_m"],
                  "end at %.4f m within its interval %.4f of 132 m" % (e["distance_m"], e["distance_uncertainty_m"]))
            check(e["skin_corrected"] is True and e["skin_shift_s"] > 0.0, "skin-corrected, moved earlier")
        # 4.895e-7: the length-weighted mean of the three segments' K, each dB figure converted with
        # the neper-decibel relation 1 Np = 20 log10(e) dB (ISO 80000-3, NIST SP 811) [calc]
        check(res["skin_loss_s05_per_m"] is not None and abs(res["skin_loss_s05_per_m"] - 4.895e-7) < 5e-10,
              "K from the line file (%s)" % res["skin_loss_s05_per_m"])
        check(res["skin_loss_estimated"] is False and res["skin_explained"] > 0, "K given, pieces explained")
        check("MISSING" not in out and out.count("below the threshold") == 2,
              "zero-reflection junctions not seen, not MISSING:\n%s" % out)
        check("delay (us)" in out, "cable delays in microseconds")
        with open(os.path.join(tmp, "f.html"), encoding="utf-8") as f:
            html = f.read()
        check("1 of 4 expected features found (2 expected below the detection threshold)" in html and
              html.count("not seen: expected below the detection threshold") == 2,
              "the report: zero-reflection junctions below the threshold, not missing")
        check("Skin-effect loss of the cable" in html, "the report states the skin-effect loss")
        rc, out, se = run(["locate", "feed.wav", "--pulse-channel", "2", "--line", LINE, "--skin-loss", "0",
                           "--json", "p.json"], tmp)
        check(rc == 0, "locate --skin-loss 0 exits 0 (%d %s)" % (rc, se))
        with open(os.path.join(tmp, "p.json")) as f:
            plain = json.load(f)
        pe = plain["events"]
        check(len(pe) > 1 and pe[0]["distance_m"] - 132.0 > 0.05 and abs(pe[0]["reflection"]) < 0.5,
              "without the loss the end is late, weak and split (%s)" %
              [(round(e["distance_m"], 3), round(e["reflection"], 3)) for e in pe[:3]])
        check(plain["skin_loss_s05_per_m"] is None, "no K reported with --skin-loss 0")
    finally:
        shutil.rmtree(tmp, ignore_errors=True)
    return check.done()


if __name__ == "__main__":
    sys.exit(main())
