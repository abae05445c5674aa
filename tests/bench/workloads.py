"""tests/bench/workloads.py -- the benchmark workloads of feasgate.

Purpose: build, from a fixed seed, the model documents and check requests
the benchmarks run, plus a plain parameter file that the NumPy side
(numpy_side.py) reads, so both sides simulate exactly the same law and the
same constraint rows. All figures are invented for benchmarking; nothing is
read from outside the repository.

Design: pure standard-library Python (the driver runs without NumPy; only
the NumPy side imports it). Each builder returns (model, request, params):
  affine     50 correlated normals (multivariate_normal, sd given, equal
             correlation 0.3 as a full matrix), 20 affine rows dot(a_r, z)
             <= cap_r, caps at about 2.6 row standard deviations.
  chain      a 20-stage max-plus chain: lognormal durations, finish times
             by `elements` recursion, a waiting row and a finish row per
             stage (40 rows).
  table      a weighted scenario_table of 10,000 invented rows x 30 columns
             and 100 rows of the form s[a] + 0.5 s[b] - 0.25 s[c] <= cap.
  theatre, microgrid   the demo models of deploy/demo/ with their passing
             candidates.
Invariant: the same seed gives byte-identical documents, so figures from
different runs compare the same work.

Thread use: none (a script module).
"""

import json
import math
import os
import random

ROOT = os.path.abspath(os.path.join(os.path.dirname(__file__), "..", ".."))
DEMO = os.path.join(ROOT, "deploy", "demo")


def _chol(a):
    n = len(a)
    low = [[0.0] * n for _ in range(n)]
    for i in range(n):
        for j in range(i + 1):
            s = a[i][j] - sum(low[i][k] * low[j][k] for k in range(j))
            low[i][j] = math.sqrt(s) if i == j else s / low[j][j]
    return low


def affine(rng):
    d, rows, rho = 50, 20, 0.3
    mean = [round(rng.uniform(-1, 1), 2) for _ in range(d)]
    sd = [round(rng.uniform(0.5, 2.0), 2) for _ in range(d)]
    corr = [[1.0 if i == j else rho for j in range(d)] for i in range(d)]
    coef = [[round(rng.uniform(-1, 1), 2) for _ in range(d)] for _ in range(rows)]
    cap = []
    for a in coef:
        m = sum(a[j] * mean[j] for j in range(d))
        var = sum(a[i] * a[j] * sd[i] * sd[j] * corr[i][j]
                  for i in range(d) for j in range(d))
        cap.append(round(m + 2.6 * math.sqrt(var), 3))
    model = {
        "format": 1, "name": "bench-affine",
        "title": "Benchmark: affine rows in correlated normals (invented)",
        "decisions": [{"name": "cap", "size": rows}],
        "uncertain": [{"name": "z", "size": d, "distribution": {
            "family": "multivariate_normal", "mean": mean, "sd": sd,
            "correlation": corr}}],
        "constraints": [
            {"name": "r%d" % r,
             "require": "dot([%s], z) <= cap[%d]" % (
                 ", ".join(repr(x) for x in coef[r]), r)}
            for r in range(rows)],
    }
    request = {"decision": {"cap": cap}, "seed": 11}
    params = {"mean": mean, "sd": sd, "corr": corr, "coef": coef, "cap": cap}
    return model, request, params


def chain(rng):
    k = 20
    mean = [round(rng.uniform(30, 90), 1) for _ in range(k)]
    sd = [round(m * rng.uniform(0.15, 0.35), 1) for m in mean]
    start, t = [], 0.0
    for m in mean:
        start.append(round(t))
        t += m * 1.12
    due = [round(s + m * 1.9) for s, m in zip(start, mean)]
    elements = ["start[0] + dur[0]"] + [
        "max(start[%d], finish[%d]) + dur[%d]" % (i, i - 1, i)
        for i in range(1, k)]
    prev = "[0, " + ", ".join("finish[%d]" % i for i in range(k - 1)) + "]"
    model = {
        "format": 1, "name": "bench-chain",
        "title": "Benchmark: 20-stage max-plus chain (invented)",
        "decisions": [{"name": "start", "size": k}, {"name": "due", "size": k}],
        "uncertain": [{"name": "dur", "size": k, "distribution": {
            "family": "lognormal", "mean": mean, "sd": sd}}],
        "definitions": [
            {"name": "finish", "elements": elements},
            {"name": "wait", "value": "above_zero(%s - start)" % prev}],
        "constraints": [
            {"name": "waiting", "require": "wait <= 25"},
            {"name": "finished", "require": "finish <= due"}],
    }
    request = {"decision": {"start": start, "due": due}, "seed": 12}
    params = {"mean": mean, "sd": sd, "start": start, "due": due, "wait": 25}
    return model, request, params


def table(rng):
    n, cols, rows = 10000, 30, 100
    scale = [rng.uniform(5, 50) for _ in range(cols)]
    data = [[round(rng.gammavariate(3.0, scale[c] / 3.0), 2) for c in range(cols)]
            for _ in range(n)]
    weights = [rng.randint(1, 4) for _ in range(n)]
    total = float(sum(weights))
    terms, cap = [], []
    for _ in range(rows):
        a, b, c = rng.sample(range(cols), 3)
        terms.append((a, b, c))
        vals = sorted((r[a] + 0.5 * r[b] - 0.25 * r[c], w)
                      for r, w in zip(data, weights))
        acc, q = 0.0, vals[-1][0]
        for v, w in vals:  # the weighted 0.99 quantile
            acc += w / total
            if acc >= 0.99:
                q = v
                break
        cap.append(round(q, 2))
    model = {
        "format": 1, "name": "bench-table",
        "title": "Benchmark: wide scenario table (invented)",
        "decisions": [{"name": "cap", "size": rows}],
        "uncertain": [{"name": "s", "size": cols, "distribution": {
            "family": "scenario_table", "rows": data, "weights": weights}}],
        "constraints": [
            {"name": "t%d" % r,
             "require": "s[%d] + 0.5 * s[%d] - 0.25 * s[%d] <= cap[%d]" % (
                 a, b, c, r)}
            for r, (a, b, c) in enumerate(terms)],
    }
    request = {"decision": {"cap": cap}, "seed": 13}
    params = {"data": data, "weights": weights, "terms": terms, "cap": cap}
    return model, request, params


def _demo(name):
    with open(os.path.join(DEMO, name + ".model.json")) as f:
        model = json.load(f)
    with open(os.path.join(DEMO, name + ".pass.json")) as f:
        request = json.load(f)
    request.pop("samples", None)
    return model, request, {"model": model, "decision": request["decision"]}


def theatre(rng):
    return _demo("theatre-list")


def microgrid(rng):
    return _demo("microgrid-day")


BUILDERS = {"affine": affine, "chain": chain, "table": table,
            "theatre": theatre, "microgrid": microgrid}


def write_all(directory, names):
    """Write NAME.model.json, NAME.request.json, NAME.params.json."""
    out = {}
    for name in names:
        model, request, params = BUILDERS[name](random.Random(20261201))
        paths = {}
        for kind, obj in (("model", model), ("request", request),
                          ("params", params)):
            p = os.path.join(directory, "%s.%s.json" % (name, kind))
            with open(p, "w") as f:
                json.dump(obj, f)
            paths[kind] = p
        out[name] = paths
    return out
