#!/usr/bin/python3
"""tests/api/test_cli.py -- the command line a person meets.

Runs the `feasgate` binary ($FEASGATE_BIN) and checks:
  - `feasgate --help` lists every command, and `feasgate COMMAND --help`
    exits 0 with a usage text for each (check also with --server);
  - `serve --help` shows each setting's default; the old spelling of
    --allow-keyless is an unknown option;
  - `feasgate validate MODEL.json...`: exit 0 with name, digest and summary
    for valid documents, 3 with the JSON Pointer for an invalid one;
  - malformed JSON in a model or request file (offline and with --server,
    before anything is sent) is reported by line and column;
  - option errors name the option as typed ("--samples: expected ...");
  - `check --summary`: the excess columns name their basis, `sole` is
    explained, rows left out are counted (--rows N), an inconclusive
    check shows samples_to_settle, and the figures are those of the JSON
    result of the same check; `check --server URL --summary` against a
    daemon prints the same table as the offline check.
Expected texts are the program's own; figures are compared with the JSON
result of the same command, not with constants.

Prints one line per failed check and "N passed, N failed" last.
"""
import json
import os
import re
import subprocess
import sys
import tempfile
from pathlib import Path

from apicommon import BIN, Daemon, Results

R = Results()
check = R.check
ROOT = Path(__file__).resolve().parents[2]
DEMO = ROOT / "deploy" / "demo"
TMP = tempfile.mkdtemp(prefix="fg-cli-")
COMMANDS = ["serve", "check", "validate", "register", "scenarios",
            "sample-size", "keys", "version", "explain", "replay",
            "sample-model"]


def run(*args, env=None):
    return subprocess.run([BIN] + [str(a) for a in args], capture_output=True,
                          text=True, timeout=300, env=env)


def write(name, text):
    path = os.path.join(TMP, name)
    with open(path, "w") as f:
        f.write(text if isinstance(text, str) else json.dumps(text))
    return path


def test_help():
    p = run("--help")
    check(p.returncode == 0, "feasgate --help exits 0")
    for c in COMMANDS:
        check(re.search(r"^  %s\s" % re.escape(c), p.stdout, re.M),
              "feasgate --help lists %s" % c)
    for c in COMMANDS:
        p = run(c, "--help")
        check(p.returncode == 0 and "usage:" in p.stdout and "feasgate" in p.stdout,
              "feasgate %s --help exits 0 with a usage (%d: %s)"
              % (c, p.returncode, p.stderr.strip()))
    p = run("check", "--server", "http://127.0.0.1:9", "--help")
    check(p.returncode == 0 and "--summary" in p.stdout,
          "check --server --help exits 0 and lists --summary")
    p = run("frobnicate")
    check(p.returncode == 3 and "unknown command 'frobnicate'" in p.stderr,
          "an unknown command exits 3 and says so")


def test_serve_help():
    p = run("serve", "--help")
    out = p.stdout
    check("default" in out and "127.0.0.1:8080" in out
          and "sqlite:var/feasgate.db" in out and "3600 s" in out
          and re.search(r"--queue\s+FEASGATE_QUEUE\s+64\s", out),
          "serve --help shows defaults")
    check(re.search(r"--allow-keyless\s+FEASGATE_ALLOW_KEYLESS\s+off", out),
          "serve --help lists --allow-keyless, off by default")
    check("insecure" not in out.lower(), "the old flag name is gone")
    p = run("serve", "--insecure")
    check(p.returncode == 3 and "unknown option '--insecure'" in p.stderr,
          "serve --insecure is an unknown option (%d: %s)"
          % (p.returncode, p.stderr.strip()))


def test_validate():
    good = [DEMO / "theatre-list.model.json", DEMO / "microgrid-day.model.json"]
    p = run("validate", *good)
    check(p.returncode == 0, "validate of the demo models exits 0 (%s)"
          % p.stderr.strip())
    for name in ("theatre-list", "microgrid-day"):
        check(re.search(r"valid, model %s, sha256:[0-9a-f]{64}" % name,
                        p.stdout), "validate names %s and its digest" % name)
    check('"rows":7' in p.stdout, "validate prints the summary")
    bad = write("bad.model.json", {
        "format": 1, "name": "water-points", "decisions": [{"name": "taps"}],
        "uncertain": [{"name": "queue_share", "distribution":
                       {"family": "beta", "a": 0.01, "b": 2}}],
        "constraints": [{"name": "c", "require": "queue_share <= taps"}]})
    p = run("validate", bad)
    check(p.returncode == 3 and "/uncertain/0/distribution/a" in p.stderr,
          "an invalid model exits 3 with its pointer (%d: %s)"
          % (p.returncode, p.stderr.strip()))
    old = write("old.model.json", {
        "format": 1, "name": "water-points", "decisions": [{"name": "taps"}],
        "uncertain": [], "constraints": [{"name": "c",
                                          "require": "pos(taps) <= 3"}]})
    p = run("validate", old)
    check(p.returncode == 3 and "unknown function 'pos'" in p.stderr
          and "/constraints/0/require" in p.stderr,
          "pos is no function of the language (%s)" % p.stderr.strip())
    p = run("validate", bad, good[0])
    check(p.returncode == 3 and "valid, model theatre-list" in p.stdout,
          "validate of several files reports each and exits 3 on any fault")
    p = run("validate")
    check(p.returncode == 3, "validate without a file exits 3")


def test_malformed_json():
    model = write("broken.model.json",
                  '{"format": 1,\n "name": "x",\n "decisions": [}\n')
    p = run("validate", model)
    check(p.returncode == 3 and "line 3, column 16" in p.stderr,
          "a malformed model is reported by line and column (%s)"
          % p.stderr.strip())
    req = write("broken.request.json",
                '{\n  "decision": {"start": [0, 60]},\n  "samples": 10,,\n}')
    p = run("check", DEMO / "theatre-list.model.json", req)
    check(p.returncode == 3 and "line 3, column 17" in p.stderr,
          "a malformed request is reported by line and column (%s)"
          % p.stderr.strip())
    # Parsed before anything is sent: nothing listens on port 9.
    p = run("check", "--server", "http://127.0.0.1:9", "theatre-list", req)
    check(p.returncode == 3 and "line 3, column 17" in p.stderr,
          "with --server too (%s)" % p.stderr.strip())
    utf = write("utf.request.json", '{"label": "\u00e9t\u00e9",\n "x": ]}')
    p = run("check", DEMO / "theatre-list.model.json", utf)
    check("line 2, column 7" in p.stderr,
          "columns count characters, not bytes (%s)" % p.stderr.strip())


def test_option_errors():
    m, r = DEMO / "theatre-list.model.json", DEMO / "theatre-list.pass.json"
    cases = [
        (("check", m, r, "--samples", "x"), "--samples: expected"),
        (("check", m, r, "--workers", "0"), "--workers: expected"),
        (("check", m, r, "--chunk", "100"), "--chunk: expected"),
        (("check", m, r, "--rows", "0"), "--rows: expected"),
        (("check", m, r, "--seed"), "--seed: expected a value"),
        (("check", m, r, "--frob"), "--frob: unknown option"),
        (("scenarios", m, "--count", "many"), "--count: expected"),
        (("check", "--server", "http://127.0.0.1:9", "--timeout", "x",
          "theatre-list", r), "--timeout: expected"),
        (("check", "--server", "http://127.0.0.1:9", "--rows", "-1",
          "theatre-list", r), "--rows: expected"),
        (("serve", "--workers", "0"), "--workers: expected"),
        (("sample-size", "--half-width", "x", "--confidence", "0.95"),
         "--half-width: expected"),
        (("sample-size", "--half-width", "2", "--confidence", "0.95"),
         "--half-width: must be"),
        (("sample-size", "--bogus", "1"), "--bogus: unknown option"),
        (("keys", "add", "ci", "--role", "boss", "--store",
          "sqlite:" + os.path.join(TMP, "k.db")), "--role: expected"),
        (("keys", "list", "--store"), "--store: expected a value"),
    ]
    for args, want in cases:
        p = run(*args)
        check(p.returncode == 3 and want in p.stderr,
              "%s: exit 3 with '%s' (%d: %s)"
              % (" ".join(str(a) for a in args[-2:]), want, p.returncode,
                 p.stderr.strip()))


def table_rows(out):
    """Row lines of a --summary table: name and the P(violated) figure."""
    rows, on = [], False
    for line in out.splitlines():
        if line.startswith("row (worst first)"):
            on = True
            continue
        if on and (not line.strip() or line.startswith("...")):
            if rows:
                break
            continue
        if on and not line.startswith(" "):
            rows.append(line.split())
    return rows


def test_summary():
    m = DEMO / "microgrid-day.model.json"
    r = DEMO / "microgrid-day.fail.json"
    js = run("check", m, r, "--samples", "20000")
    res = json.loads(js.stdout)
    total = len(res["constraints"])
    p = run("check", m, r, "--samples", "20000", "--summary", "--rows", "5")
    out = p.stdout
    check(p.returncode == 1 and out.startswith("verdict    fail"),
          "--summary starts with the verdict and exits as the check")
    check("(all samples)" in out and out.count("(if violated)") == 2,
          "the excess columns name their basis")
    check("sole: samples in which this row alone fails" in out,
          "the table explains sole")
    rows = table_rows(out)
    check(len(rows) == 5, "--rows 5 prints 5 rows (%d)" % len(rows))
    check("... %d more rows not shown" % (total - 5) in out,
          "the table counts the %d rows left out" % (total - 5))
    for got, want in zip(rows, res["constraints"]):
        check(got[0] == want["name"]
              and abs(float(got[1]) - want["probability"]) < 1e-6
              and int(got[2]) == want["sole_cause"],
              "row %s matches the JSON result" % want["name"])
    p = run("check", m, r, "--samples", "20000", "--summary", "--rows",
            str(total))
    check(len(table_rows(p.stdout)) == total and "not shown" not in p.stdout,
          "--rows %d shows every row and leaves none out" % total)

    # Inconclusive: Poisson(20) <= 28 holds with probability 0.9657
    # (scipy.stats.poisson.cdf), near 0.95; 500 samples cannot tell.
    cold = write("cold.model.json", {
        "format": 1, "name": "cold-store",
        "decisions": [{"name": "limit", "lower": 0, "integer": True}],
        "uncertain": [{"name": "openings", "distribution":
                       {"family": "poisson", "mean": 20}}],
        "constraints": [{"name": "door", "require": "openings <= limit"}],
        "target": {"probability": 0.95, "confidence": 0.95}})
    req = write("cold.request.json", {"decision": {"limit": 28},
                                      "samples": 500, "seed": 5})
    js = json.loads(run("check", cold, req).stdout)
    p = run("check", cold, req, "--summary")
    check(p.returncode == 2 and js["verdict"] == "inconclusive"
          and js["samples_to_settle"]
          and "settle     about %d samples" % js["samples_to_settle"]
          in p.stdout,
          "an inconclusive summary shows samples_to_settle (%s)"
          % p.stdout.splitlines()[:4])
    return cold, req


def test_remote_summary(cold, req):
    store = "sqlite:" + os.path.join(TMP, "cli.db")
    d = Daemon(store)
    try:
        if not check(d.address is not None, "the daemon starts"):
            return
        with open(cold) as f:
            st, _, _ = d.request("POST", "/v1/models", json.load(f))
        check(st == 201, "the model registers (%s)" % st)
        url = "http://%s" % d.address
        p = run("check", "--server", url, "--summary", "cold-store", req)
        off = run("check", cold, req, "--summary")
        check(p.returncode == 2, "check --server --summary exits as the "
              "verdict (%d: %s)" % (p.returncode, p.stderr.strip()))
        # Same table but for the model line (the daemon's has a version).
        strip = lambda s: [l for l in s.splitlines()
                           if not l.startswith("model ")]
        check(strip(p.stdout) == strip(off.stdout),
              "check --server --summary prints the offline table:\n%s\n%s"
              % (p.stdout, off.stdout))
        check("model      cold-store version 1" in p.stdout,
              "the remote summary names the model version")
    finally:
        d.stop()


def main():
    test_help()
    test_serve_help()
    test_validate()
    test_malformed_json()
    test_option_errors()
    cold, req = test_summary()
    test_remote_summary(cold, req)
    return R.summary()


if __name__ == "__main__":
    sys.exit(main())
