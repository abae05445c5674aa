#!/usr/bin/python3
"""tests/bench/sample_model_bench.py -- what the tightest big-M buys.

For the loop test's three invented models (tests/reference/milp.py), the
indicator program over s = 200 design scenarios is exported by
`feasgate sample-model` (each row's M the largest value of the row over
the decisions' bounds in its scenario) and rewritten with one uniform
M = 1e6 in every scenario row (the right-hand side M - c moved with it, so
the rewritten program has the same integer solutions). Both are given to

- GLPK with --nomip: the root relaxation bound (the LP with the binaries
  relaxed to [0, 1]), and its gap to the optimum;
- CBC and GLPK as mixed-integer programs: the optimum and the time to
  prove it (each with a time limit, --limit seconds, default 120).

Prints a table; never fails on speed (figures in tests/bench/README.md).
Needs coinor-cbc and glpk-utils and a built feasgate ($FEASGATE_BIN or
build/feasgate). Run with /usr/bin/python3.
"""
import argparse
import os
import sys

HERE = os.path.dirname(os.path.abspath(__file__))
sys.path.insert(0, os.path.join(HERE, "..", "reference"))
import milp  # noqa: E402

UNIFORM_M = 1e6


def uniform_m(text, m_new):
    """The same program with every indicator coefficient set to m_new."""
    kinds, rhs = milp.sections(text)
    out, sec, old_m = [], None, {}
    body = text.splitlines()
    for line in body:
        if line and line[0] not in " *":
            sec = line.split()[0]
        if sec == "COLUMNS" and line.startswith(" k"):
            f = line.split()
            if f[1].startswith("s"):
                old_m[f[1]] = float(f[2])
                line = " %s %s %r" % (f[0], f[1], m_new)
        out.append(line)
    for row, m in old_m.items():
        rhs[row] = rhs.get(row, 0.0) - m + m_new
    final, sec = [], None
    for line in out:
        if line and line[0] not in " *":
            sec = line.split()[0]
            if sec == "BOUNDS":
                final.extend(" RHS %s %r" % (r, v) for r, v in rhs.items() if v != 0.0)
        if sec == "RHS" and line.startswith(" "):
            continue
        final.append(line)
    return "\n".join(final) + "\n", max(old_m.values())


def main():
    ap = argparse.ArgumentParser(description=__doc__.split("\n")[1])
    ap.add_argument("--limit", type=int, default=120, help="seconds per MIP solve")
    ap.add_argument("--scenarios", type=int, default=200)
    args = ap.parse_args()
    if not milp.solvers_present():
        print("cbc and glpsol are needed (coinor-cbc, glpk-utils)")
        return 1
    print("%-15s %-10s %12s %12s %9s %11s %11s" %
          ("model", "big-M", "root bound", "optimum", "root gap", "CBC s", "GLPK s"))
    for model, seed in ((milp.WATER, 7), (milp.WAREHOUSE, 21), (milp.DEPOT, 5)):
        ans = milp.export(model, args.scenarios, seed)
        tight = ans["text"]
        loose, m_max = uniform_m(tight, UNIFORM_M)
        if m_max >= UNIFORM_M:
            print("%s: tightest M %g is not below %g; skipped" % (model["name"], m_max, UNIFORM_M))
            continue
        for label, text in (("tightest", tight), ("1e6", loose)):
            _, root, _, _ = milp.solve_glpk(text, relax=True)
            sc, oc, _, tc = milp.solve_cbc(text, seconds=args.limit)
            sg, og, _, tg = milp.solve_glpk(text, seconds=args.limit)
            opt = oc if sc == "optimal" else og if sg == "optimal" else None
            gap = "%8.1f%%" % (100 * (opt - root) / max(abs(opt), 1e-9)) if opt is not None else "       ?"
            print("%-15s %-10s %12.4f %12s %9s %7.1f %-3s %7.1f %-3s" %
                  (model["name"], label, root, "%.4f" % opt if opt is not None else "-", gap,
                   tc, "" if sc == "optimal" else "(!)", tg, "" if sg == "optimal" else "(!)"),
                  flush=True)
        print("%-15s big-M of the tightest program: max %.4g, median %.4g" %
              ("", ans["big_m"]["max"], ans["big_m"]["median"]), flush=True)
    print("(!) = stopped at the time limit without proving the optimum")
    return 0


if __name__ == "__main__":
    sys.exit(main())
