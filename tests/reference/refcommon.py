"""tests/reference/refcommon.py -- shared helpers of the reference tests.

Each reference test compares feasgate with an outside reference (SciPy,
statsmodels, closed-form laws) and names the source beside each check.
Results are counted and the closing line reads "N passed, N failed".
run_check and run_scenarios drive the offline commands `feasgate check`
and `feasgate scenarios`.
"""
import json
import os
import subprocess
import sys
import tempfile

ROOT = os.path.dirname(os.path.dirname(os.path.dirname(os.path.abspath(__file__))))
BIN = os.environ.get("FEASGATE_BIN", os.path.join(ROOT, "build", "feasgate"))
REF_TOOL = os.environ.get("FEASGATE_REF_TOOL", os.path.join(ROOT, "build", "ref_tool"))


class Counter:
    def __init__(self):
        self.passed = 0
        self.failed = 0

    def check(self, ok, what):
        if ok:
            self.passed += 1
        else:
            self.failed += 1
            print("FAIL:", what, flush=True)

    def finish(self):
        print("%d passed, %d failed" % (self.passed, self.failed))
        sys.exit(1 if self.failed or self.passed == 0 else 0)


def run_check(model, request, workers=2, extra=()):
    """Run `feasgate check` offline; returns (exit status, result JSON)."""
    with tempfile.TemporaryDirectory() as d:
        mp, rp = os.path.join(d, "m.json"), os.path.join(d, "r.json")
        with open(mp, "w") as f:
            json.dump(model, f)
        with open(rp, "w") as f:
            json.dump(request, f)
        p = subprocess.run([BIN, "check", mp, rp, "--workers", str(workers), *extra],
                           capture_output=True, text=True, timeout=900)
        if p.returncode == 3:
            raise RuntimeError("feasgate check failed: " + p.stderr)
        return p.returncode, json.loads(p.stdout)


def run_scenarios(model, count, seed, start=0, stream="design", csv=False):
    """Run `feasgate scenarios` offline; returns its standard output (the
    JSON text, or the CSV text with `csv`). Counts above the default cap
    are allowed with --max."""
    with tempfile.TemporaryDirectory() as d:
        mp = os.path.join(d, "m.json")
        with open(mp, "w") as f:
            json.dump(model, f)
        args = [BIN, "scenarios", mp, "--count", str(count), "--seed", str(seed),
                "--start", str(start), "--stream", stream, "--max", str(max(count, 1))]
        if csv:
            args.append("--csv")
        p = subprocess.run(args, capture_output=True, text=True, timeout=900)
        if p.returncode != 0:
            raise RuntimeError("feasgate scenarios failed: " + p.stderr)
        return p.stdout
