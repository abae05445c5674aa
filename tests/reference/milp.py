"""tests/reference/milp.py -- the scenario program taken to outside solvers.

Shared by test_sample_model_loop.py, test_scenario_guarantee.py and
tests/bench/sample_model_bench.py:

- export(model, s, seed, form, ...): `feasgate sample-model --json`
  offline (the same text POST /v1/models/{name}/sample-models answers);
- with_margin(text, delta): the program with every <= row's right-hand
  side lowered by delta (every constraint row feasgate writes is one; the
  indicator form's keep row, >=, counts scenarios and stays), written as
  new RHS lines;
- solve_cbc / solve_glpk: Debian's coinor-cbc (`cbc FILE solve solu OUT`)
  and glpk-utils (`glpsol --freemps FILE -w OUT`, GLPK's raw solution
  format: "s mip|bas ..." then "j <column> ..." in column order); each
  returns (status, objective, {column: value}, seconds);
- plan(answer, values): the solution read back through the answer's column
  map into a check request's "decision" object;
- WATER, WAREHOUSE, DEPOT: the invented models of the loop test and the
  benchmark (4, 5 and 8 decision components, continuous and integer).

GLPK runs without its LP preprocessor (--nopresol): on one of the guarantee
test's programs (600 singleton rows on 3 columns) glpsol 5.0's preprocessor
answered "optimal" with a row missed by 6e-4 (seen with `glpsol -o`); the
simplex alone solves it exactly.

Why a margin: both solvers meet rows to a feasibility tolerance of about
1e-7 relative (their documented defaults; common practice), and CBC's
solution file prints 8 significant digits, while feasgate counts a row as
held only when lhs <= rhs exactly. A plan taken straight from a solver can
therefore miss a binding scenario row by 1e-9; the loop solves the program
with a margin so the plan it checks holds its kept scenarios exactly.
"""
import json
import os
import re
import shutil
import subprocess
import tempfile
import time

from refcommon import BIN

WATER = {
    "format": 1, "name": "water-summer",
    "title": "Summer supply of a small water utility (invented figures)",
    "decisions": [
        {"name": "draw", "size": 3, "lower": 0, "upper": [25, 30, 25]},
        {"name": "tanker_days", "lower": 0, "upper": 10, "integer": True},
    ],
    "uncertain": [
        {"name": "demand", "size": 2, "distribution": {"family": "normal", "mean": [50, 30], "sd": [6, 4]}},
        {"name": "loss", "distribution": {"family": "uniform", "low": 0.05, "high": 0.15}},
    ],
    "constraints": [
        {"name": "town", "require": "(1 - loss) * (draw[0] + draw[1]) + 2 * tanker_days >= demand[0]"},
        {"name": "farms", "require": "draw[1] + draw[2] >= demand[1]"},
        {"name": "licence", "require": "sum(draw) <= 70"},
    ],
    "objective": {"minimize": "1.0 * draw[0] + 1.4 * draw[1] + 0.8 * draw[2] + 5 * tanker_days"},
    "target": {"probability": 0.95},
}

WAREHOUSE = {
    "format": 1, "name": "warehouse-week",
    "title": "Stock and crew of a regional warehouse for one week (invented figures)",
    "decisions": [
        {"name": "stock", "size": 2, "lower": 0, "upper": [60, 50], "integer": True},
        {"name": "overtime", "lower": 0, "upper": 8},
        {"name": "temps", "lower": 0, "upper": 6, "integer": True},
        {"name": "transfer", "lower": -10, "upper": 10},
    ],
    "uncertain": [
        {"name": "orders", "size": 2, "distribution": {"family": "gamma", "shape": [20, 12], "scale": [1.5, 2]}},
        {"name": "speed", "distribution": {"family": "uniform", "low": 0.8, "high": 1.2}},
        {"name": "returns", "distribution": {"family": "discrete", "values": [0, 3, 6], "weights": [0.6, 0.3, 0.1]}},
    ],
    "definitions": [{"name": "picked", "value": "speed * (20 + 4 * temps) + 3 * overtime * speed"}],
    "constraints": [
        {"name": "cover", "require": "stock + [0.5, -0.5] * transfer >= orders"},
        {"name": "pick", "require": "picked >= 0.6 * (orders[0] + orders[1]) - returns"},
        {"name": "budget", "require": "stock[0] + stock[1] + 4 * overtime <= 110"},
    ],
    "objective": {"maximize": "500 - 2 * sum(stock) - 9 * overtime * speed - 15 * temps - 0.5 * transfer"},
    "target": {"probability": 0.95},
}

DEPOT = {
    "format": 1, "name": "depot-morning",
    "title": "Buses out of one depot on six routes at the morning peak (invented figures)",
    "decisions": [
        {"name": "buses", "size": 6, "lower": 1, "upper": 9, "integer": True},
        {"name": "spare", "lower": 0, "upper": 4, "integer": True},
        {"name": "coach_hours", "lower": 0, "upper": 6},
    ],
    "uncertain": [
        {"name": "riders", "size": 6, "distribution": {"family": "poisson", "mean": [240, 180, 300, 150, 210, 260]}},
        {"name": "sick", "distribution": {"family": "binomial", "trials": 30, "p": 0.1}},
    ],
    "constraints": [
        {"name": "seats", "require": "60 * buses + [20, 0, 20, 0, 0, 20] * coach_hours >= riders"},
        {"name": "drivers", "require": "sum(buses) + sick <= 36 + spare"},
    ],
    "objective": {"minimize": "100 * sum(buses) + 60 * spare + 45 * coach_hours"},
    "target": {"probability": 0.95},
}

CBC = shutil.which("cbc")
GLPSOL = shutil.which("glpsol")


def solvers_present():
    return CBC is not None and GLPSOL is not None


def export(model, scenarios, seed, form="indicator", target=None,
           confidence=None):
    """The JSON answer of `feasgate sample-model --json` (text included)."""
    with tempfile.TemporaryDirectory() as d:
        mp = os.path.join(d, "m.json")
        with open(mp, "w") as f:
            json.dump(model, f)
        args = [BIN, "sample-model", mp, "--scenarios", str(scenarios),
                "--seed", str(seed), "--form", form, "--json"]
        if target is not None:
            args += ["--target", repr(target)]
        if confidence is not None:
            args += ["--confidence", repr(confidence)]
        p = subprocess.run(args, capture_output=True, text=True, timeout=600)
        if p.returncode != 0:
            raise RuntimeError("feasgate sample-model failed: " + p.stderr)
        return json.loads(p.stdout)


def sections(text):
    """(row kinds {name: 'N'|'L'|'G'|'E'}, rhs {row: value}) of free MPS."""
    kinds, rhs, sec = {}, {}, None
    for line in text.splitlines():
        if not line or line[0] == "*":
            continue
        if line[0] != " ":
            sec = line.split()[0]
            continue
        f = line.split()
        if sec == "ROWS":
            kinds[f[1]] = f[0]
        elif sec == "RHS":
            rhs[f[1]] = float(f[2])
    return kinds, rhs


def with_margin(text, delta):
    kinds, rhs = sections(text)
    lines = []
    for name, k in kinds.items():
        v = rhs.get(name, 0.0)
        if k == "L":
            v -= delta
        if v != 0.0:
            lines.append(" RHS %s %r" % (name, v))
    out, sec = [], None
    for line in text.splitlines():
        if line and line[0] not in " *":
            sec = line.split()[0]
            if sec == "BOUNDS":
                out.extend(lines)
        if sec == "RHS" and line.startswith(" "):
            continue
        out.append(line)
    return "\n".join(out) + "\n"


def columns_of(text):
    """Column names in the order of the COLUMNS section."""
    cols, sec = [], None
    for line in text.splitlines():
        if not line or line[0] == "*":
            continue
        if line[0] != " ":
            sec = line.split()[0]
            continue
        if sec == "COLUMNS":
            f = line.split()
            if len(f) >= 2 and f[1] == "'MARKER'":
                continue
            if not cols or cols[-1] != f[0]:
                cols.append(f[0])
    return cols


def solve_cbc(text, seconds=600):
    with tempfile.TemporaryDirectory() as d:
        mp, sp = os.path.join(d, "p.mps"), os.path.join(d, "sol.txt")
        with open(mp, "w") as f:
            f.write(text)
        t0 = time.monotonic()
        p = subprocess.run([CBC, mp, "sec", str(seconds), "solve", "solu", sp],
                           capture_output=True, text=True, timeout=seconds + 120)
        took = time.monotonic() - t0
        if "0 errors" not in p.stdout:
            raise RuntimeError("cbc did not read the program:\n" + p.stdout[-2000:])
        with open(sp) as f:
            lines = f.read().splitlines()
    head = lines[0]
    status = "optimal" if head.startswith("Optimal") else \
        "infeasible" if "nfeasible" in head else head.split()[0].lower()
    m = re.search(r"objective value\s+(\S+)", head)
    obj = float(m.group(1)) if m else None
    values = {}
    for line in lines[1:]:
        f = line.replace("**", " ").split()
        if len(f) >= 3:
            values[f[1]] = float(f[2])
    return status, obj, values, took


def solve_glpk(text, seconds=600, relax=False):
    with tempfile.TemporaryDirectory() as d:
        mp, sp = os.path.join(d, "p.mps"), os.path.join(d, "sol.txt")
        with open(mp, "w") as f:
            f.write(text)
        args = [GLPSOL, "--freemps", mp, "--nopresol", "--tmlim", str(seconds),
                "-w", sp]
        if relax:
            args.insert(1, "--nomip")
        t0 = time.monotonic()
        p = subprocess.run(args, capture_output=True, text=True,
                           timeout=seconds + 120)
        took = time.monotonic() - t0
        if p.returncode != 0:
            raise RuntimeError("glpsol failed:\n" + p.stdout[-2000:])
        with open(sp) as f:
            lines = [l for l in f.read().splitlines() if not l.startswith("c")]
    cols = columns_of(text)
    s = lines[0].split()
    values = {}
    if s[1] == "mip":
        status = {"o": "optimal", "f": "feasible", "n": "infeasible"}.get(s[4], s[4])
        obj = float(s[5])
        for l in lines:
            f = l.split()
            if f[0] == "j":
                values[cols[int(f[1]) - 1]] = float(f[2])
    else:  # "s bas rows cols primal dual obj"
        status = "optimal" if s[4] == "f" and s[5] == "f" else \
            "infeasible" if s[4] == "n" else s[4]
        obj = float(s[6])
        for l in lines:
            f = l.split()
            if f[0] == "j":
                values[cols[int(f[1]) - 1]] = float(f[3])
    return status, obj, values, took


def plan(answer, values, model):
    """The solver's values as a check request's "decision" object; integer
    decisions rounded (both solvers report them within 1e-6)."""
    flat = {}
    for comp, col in answer["columns"].items():
        flat[comp] = values.get(col, 0.0)
    out = {}
    for d in model["decisions"]:
        integer = d.get("integer", False)
        fix = (lambda v: float(round(v))) if integer else (lambda v: v)
        if "size" in d:
            out[d["name"]] = [fix(flat["%s[%d]" % (d["name"], i)]) for i in range(d["size"])]
        else:
            out[d["name"]] = fix(flat[d["name"]])
    return out
