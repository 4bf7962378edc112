"""docs/validation.md cannot drift from the suite.

Checks (each failure names the row or file):
- the table has its header and at least 30 rows of outside checks and cross-checks (kinds pub, mem,
  calc, cp, ref, cross), ids unique, no empty cell;
- every row names a test program that exists as tests/<name>.c or tests/<name>.py (so CTest runs
  it: the build globs tests/test_*), and its grep string appears verbatim in that program's source;
- every test program whose source cites an outside source (one of the names below, the sources of
  shared/REFERENCE.md) appears in the table or in the exempt list at the end of the document;
- exempt files exist and are not also in the table.
"""
import glob
import os
import re
import sys

SRC = os.environ.get("SE_SOURCE_DIR", os.path.join(os.path.dirname(__file__), ".."))
DOC = os.path.join(SRC, "docs", "validation.md")
KINDS = {"pub", "mem", "calc", "cp", "ref", "cross"}
# Names of outside sources (shared/REFERENCE.md) whose mention marks a test as citing one.
SOURCE_MARKERS = re.compile(
    r"Serway|Young & Freedman|Pozar|BIPM|NIST|Jonkman|Robertson|NREL|DNV|ASTM|EN 1993|Irvine|"
    r"Rice's|S\.O\. Rice|Rice k|Kay 1993|S\.M\. Kay|Rousseeuw|SciPy|scipy|FIPS|hashlib|Backus|"
    r"Goupillaud|NEETRAC|Langtangen|d'Alembert|Wigington|Golay|Barker|Rife|TIA-222|Hogbom|"
    r"Demirli|Svilainis|Ziv|Woody|Rohling|Croxford")

failures = 0
checks = 0


def check(cond, what):
    global failures, checks
    checks += 1
    if not cond:
        failures += 1
        print("FAIL %s" % what)
    return cond


def split_row(line):
    # cells between the outer pipes; a grep string is in backticks and holds no pipe
    cells = [c.strip() for c in line.strip().strip("|").split("|")]
    return cells


def main():
    if not check(os.path.exists(DOC), "docs/validation.md exists"):
        return 1
    with open(DOC, encoding="utf-8") as f:
        text = f.read()
    lines = text.splitlines()
    header = [i for i, l in enumerate(lines) if l.startswith("| id |")]
    if not check(len(header) == 1, "exactly one table (one '| id |' header), found %d" % len(header)):
        return 1
    cols = split_row(lines[header[0]])
    want = ["id", "kind", "check", "value", "tolerance", "source", "test", "grep"]
    if not check(cols == want, "table columns %s (found %s)" % (want, cols)):
        return 1
    rows = []
    for l in lines[header[0] + 2:]:
        if not l.startswith("|"):
            break
        rows.append(split_row(l))
    ids = set()
    in_table = set()
    outside = 0
    sources = {}
    for r in rows:
        if not check(len(r) == len(want), "row %r has %d cells" % (r[:1], len(r))):
            continue
        rid, kind, _, value, tol, source, test, grep = r
        check(rid not in ids, "row id %s is unique" % rid)
        ids.add(rid)
        check(all(c for c in r), "row %s has no empty cell" % rid)
        check(kind in KINDS, "row %s kind %r is one of %s" % (rid, kind, sorted(KINDS)))
        if kind in KINDS:
            outside += 1
        m = re.fullmatch(r"`([^`]+)`", grep)
        if not check(m is not None, "row %s grep cell is one backticked string (%r)" % (rid, grep)):
            continue
        paths = [p for p in (os.path.join(SRC, "tests", test + ".c"),
                             os.path.join(SRC, "tests", test + ".py")) if os.path.exists(p)]
        if not check(test.startswith("test_") and len(paths) == 1,
                     "row %s: test program %s exists as tests/%s.c or .py" % (rid, test, test)):
            continue
        if paths[0] not in sources:
            with open(paths[0], encoding="utf-8") as f:
                sources[paths[0]] = f.read()
        check(m.group(1) in sources[paths[0]],
              "row %s: %r appears in %s" % (rid, m.group(1), os.path.basename(paths[0])))
        in_table.add(os.path.basename(paths[0]))
    check(outside >= 30, "at least 30 outside checks and cross-checks (found %d)" % outside)

    # exempt list: "- `tests/test_x.c`: reason" lines after the "## Exempt test files" heading
    exempt = set()
    if check("## Exempt test files" in text, "an '## Exempt test files' section"):
        tail = text.split("## Exempt test files", 1)[1]
        for m in re.finditer(r"^- `tests/(test_[^`]+)`", tail, re.M):
            exempt.add(m.group(1))
    for e in sorted(exempt):
        check(os.path.exists(os.path.join(SRC, "tests", e)), "exempt file tests/%s exists" % e)
        check(e not in in_table, "exempt file %s is not also in the table" % e)

    tests = sorted(glob.glob(os.path.join(SRC, "tests", "test_*.c")) +
                   glob.glob(os.path.join(SRC, "tests", "test_*.py")))
    cited = 0
    for p in tests:
        name = os.path.basename(p)
        if name == os.path.basename(__file__):
            continue
        with open(p, encoding="utf-8", errors="replace") as f:
            src = f.read()
        hit = SOURCE_MARKERS.search(src)
        if hit is None:
            continue
        cited += 1
        check(name in in_table or name in exempt,
              "%s cites an outside source (%r) but is neither in docs/validation.md nor exempt"
              % (name, hit.group(0)))
    print("docs/validation.md: %d rows (%d outside/cross), %d test programs cite outside sources, "
          "%d exempt; %d checks, %d failed" % (len(rows), outside, cited, len(exempt), checks,
                                               failures))
    return 1 if failures else 0


if __name__ == "__main__":
    sys.exit(main())
