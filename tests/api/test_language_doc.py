#!/usr/bin/python3
"""tests/api/test_language_doc.py -- every example of schemas/model-language.md runs.

The language reference marks its examples by the info string of their
fenced blocks (the reference's introduction says so):
  - `json model`: a whole document; `feasgate validate` must exit 0;
  - `json request verdict=V`: a request for the model block above it;
    `feasgate check MODEL REQUEST` must give verdict V (its exit status
    0 pass, 1 fail, 2 inconclusive, and the result's "verdict");
  - `json invalid-model pointer=P`: `feasgate validate` must exit 3 and
    name P;
  - `text values`: `EXPRESSION => VALUE` lines; each expression becomes
    the definition `r` of a small model with the decisions the reference
    lists (load = [4, -1, 2.5], cap = [1, 2, 3], k = 2), and its length,
    and each element's class (finite, nan, inf, -inf: read through the
    objective `r[i] != r[i] ? 1 : ...`, comparisons that are 0 or 1 by
    IEEE rules) and value (the objective `r[i]`, deterministic, so exact)
    are compared with VALUE;
  - `text rows`: `REQUIRE => holds | violated | nonfinite` lines; each is
    the only constraint of such a model, and the check's rows must all
    hold, have a violation, or have a non-finite row.
Expected values are the reference's own (worked by hand: 2^(3^2) = 512,
round half away from zero, IEEE 754 rules for inf and NaN); the
cold-store probabilities the prose quotes are checked against
scipy.stats.poisson.cdf. A block with an unknown info string fails the
test, so no example is silently skipped.

Prints one line per failed check and "N passed, N failed" last.
"""
import json
import math
import os
import re
import subprocess
import sys
import tempfile
from pathlib import Path

from apicommon import BIN, Results

R = Results()
check = R.check
ROOT = Path(__file__).resolve().parents[2]
DOC = ROOT / "schemas" / "model-language.md"
TMP = tempfile.mkdtemp(prefix="fg-langdoc-")

CONTEXT_DECISIONS = [{"name": "load", "size": 3}, {"name": "cap", "size": 3},
                     {"name": "k"}]
CONTEXT_VALUES = {"load": [4, -1, 2.5], "cap": [1, 2, 3], "k": 2}


def blocks(text):
    """(info string, body, line) of every fenced block."""
    out = []
    lines = text.split("\n")
    i = 0
    while i < len(lines):
        m = re.match(r"^```(.*)$", lines[i])
        if m:
            info, start = m.group(1).strip(), i + 1
            j = start
            while j < len(lines) and not lines[j].startswith("```"):
                j += 1
            out.append((info, "\n".join(lines[start:j]), i + 1))
            i = j + 1
        else:
            i += 1
    return out


def write(name, obj):
    path = os.path.join(TMP, name)
    with open(path, "w") as f:
        f.write(obj if isinstance(obj, str) else json.dumps(obj))
    return path


def run(*args):
    return subprocess.run([BIN] + list(args), capture_output=True,
                          text=True, timeout=300)


def context_model(definition=None, require="k <= 2", objective=None):
    doc = {"format": 1, "name": "doc-context", "decisions": CONTEXT_DECISIONS,
           "uncertain": [], "constraints": [{"name": "c", "require": require}]}
    if definition is not None:
        doc["definitions"] = [{"name": "r", "value": definition}]
    if objective is not None:
        doc["objective"] = {"minimize": objective}
    return doc


def run_context(doc, what):
    """Check `doc` with the context candidate; the result or None."""
    mp = write("ctx.model.json", doc)
    rp = write("ctx.request.json", {"decision": CONTEXT_VALUES,
                                    "samples": 256, "seed": 1})
    p = run("check", mp, rp, "--workers", "1")
    if p.returncode == 3:
        check(False, "%s: the check did not run: %s" % (what, p.stderr.strip()))
        return None
    return json.loads(p.stdout)


def parse_expected(text):
    text = text.strip()
    if text.startswith("["):
        return [parse_scalar(t) for t in text[1:-1].split(",")]
    return parse_scalar(text)


def parse_scalar(t):
    t = t.strip()
    return {"nan": math.nan, "inf": math.inf, "-inf": -math.inf}.get(t, None) \
        if t in ("nan", "inf", "-inf") else float(t)


def klass(x):
    if math.isnan(x):
        return 1
    if x == math.inf:
        return 2
    if x == -math.inf:
        return 3
    return 0


def check_value(expr, expected, line):
    what = "line %d: %s" % (line, expr)
    n = len(expected) if isinstance(expected, list) else 1
    res = run_context(context_model(expr, objective="length(r)"), what)
    if res is None:
        return
    if not check(res["objective"] == n, "%s: length %s, expected %d"
                 % (what, res["objective"], n)):
        return
    want = expected if isinstance(expected, list) else [expected]
    for i, w in enumerate(want):
        x = "r[%d]" % i if isinstance(expected, list) else "r"
        cls = "(%s != %s) ? 1 : ((%s == 1/0) ? 2 : ((%s == -1/0) ? 3 : 0))" % (
            x, x, x, x)
        res = run_context(context_model(expr, objective=cls), what)
        if res is None:
            return
        if not check(res["objective"] == klass(w), "%s: element %d is of "
                     "class %s, expected %s" % (what, i, res["objective"],
                                                klass(w))):
            continue
        if klass(w) == 0:
            res = run_context(context_model(expr, objective=x), what)
            if res is None:
                return
            got = res["objective"]
            check(got is not None and abs(got - w) <= 1e-12 * max(1, abs(w)),
                  "%s: element %d is %r, expected %r" % (what, i, got, w))


def check_row(require, expected, line):
    what = "line %d: %s" % (line, require)
    res = run_context(context_model(require=require), what)
    if res is None:
        return
    rows = res["constraints"]
    nonfinite = any(r.get("nonfinite", 0) > 0 for r in rows)
    violated = any(r["violated"] > 0 for r in rows)
    got = "nonfinite" if nonfinite else ("violated" if violated else "holds")
    check(got == expected, "%s: the rows %s, expected %s" % (what, got,
                                                              expected))
    if expected == "nonfinite":
        check(res["verdict"] != "pass" and res["numeric"]["problems"],
              "%s: a NaN row is listed and rules out pass" % what)


def main():
    text = DOC.read_text()
    model_path = None
    model_doc = None
    counts = {}
    for info, body, line in blocks(text):
        words = info.split()
        kind = " ".join(w for w in words if "=" not in w)
        opts = dict(w.split("=", 1) for w in words if "=" in w)
        counts[kind] = counts.get(kind, 0) + 1
        if kind == "json model":
            model_doc = json.loads(body)
            model_path = write("doc%d.model.json" % line, body)
            p = run("validate", model_path)
            check(p.returncode == 0 and "valid" in p.stdout,
                  "line %d: model %s is valid (exit %d: %s)"
                  % (line, model_doc.get("name"), p.returncode,
                     p.stderr.strip()))
        elif kind == "json request":
            check(model_path is not None, "line %d: a request after a model"
                  % line)
            rp = write("doc%d.request.json" % line, body)
            p = run("check", model_path, rp)
            want = opts.get("verdict")
            status = {"pass": 0, "fail": 1, "inconclusive": 2}.get(want)
            ok = p.returncode == status
            if ok:
                ok = json.loads(p.stdout)["verdict"] == want
            check(ok, "line %d: %s gives %s (exit %d: %s)"
                  % (line, body.strip(), want, p.returncode,
                     p.stderr.strip()[:300]))
        elif kind == "json invalid-model":
            path = write("doc%d.bad.json" % line, body)
            p = run("validate", path)
            check(p.returncode == 3 and opts["pointer"] in p.stderr,
                  "line %d: refused at %s (exit %d: %s)"
                  % (line, opts["pointer"], p.returncode, p.stderr.strip()))
        elif kind == "text values":
            for k, l in enumerate(body.split("\n")):
                if l.strip():
                    expr, exp = l.rsplit("=>", 1)
                    check_value(expr.strip(), parse_expected(exp), line + 1 + k)
        elif kind == "text rows":
            for k, l in enumerate(body.split("\n")):
                if l.strip():
                    req, exp = l.rsplit("=>", 1)
                    check_row(req.strip(), exp.strip(), line + 1 + k)
        else:
            check(False, "line %d: a block of unknown kind '%s' (every "
                  "example must be runnable)" % (line, info))
    for kind in ("json model", "json request", "json invalid-model",
                 "text values", "text rows"):
        check(counts.get(kind, 0) > 0, "the reference has %s examples" % kind)

    # The cold-store prose: P(Poisson(20) <= limit), scipy.stats.poisson.cdf.
    try:
        from scipy.stats import poisson
        for limit, quoted in ((30, 0.987), (24, 0.843), (28, 0.966)):
            check(abs(poisson.cdf(limit, 20) - quoted) < 0.0005,
                  "P(Poisson(20) <= %d) is about %g (scipy)" % (limit, quoted))
    except ImportError:
        check(False, "scipy is needed (run with /usr/bin/python3)")
    return R.summary()


if __name__ == "__main__":
    sys.exit(main())
