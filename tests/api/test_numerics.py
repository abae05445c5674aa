#!/usr/bin/python3
"""tests/api/test_numerics.py -- the quantile regressions and the family
parameter ranges through the HTTP API.

Starts `feasgate serve` on an ephemeral loopback port with a temporary
SQLite store (apicommon.Daemon; every answer is checked against its schema)
and runs, each with as few samples as still shows the fault:

  - gamma(shape 2e5, scale 1e-5) with `g <= 3` under latin_hypercube and
    sobol, and as a Gaussian-copula member under monte_carlo: the
    probability is 1 (the law's mean is 2, sd 0.0045), so the check must
    pass with every sample satisfied (the old inverse CDF returned NaN);
  - beta(1e6, 1e6) under latin_hypercube ends (the old inverse looped);
  - a coupled design whose replicate units agree (u <= 0.5 under
    latin_hypercube, 2M samples) ends: its Clopper-Pearson fallback at
    k = n/2 for n about 2e6 used to loop;
  - models outside a family's stated range are refused at registration
    with 400, a problem whose errors[].pointer names the parameter and
    whose message gives the range (include/feasgate/limits.h).
Run with /usr/bin/python3. The last line is "N passed, N failed".
"""
import os
import sys
import tempfile

from apicommon import BIN, Daemon, Results, is_problem

results = Results()
check = results.check


def one_input(name, dist, require="v <= cap", dependence=None, extra=()):
    unc = [{"name": "v", "distribution": dist}] + list(extra)
    m = {"format": 1, "name": name, "decisions": [{"name": "cap"}],
         "uncertain": unc, "constraints": [{"name": "c", "require": require}]}
    if dependence:
        m["dependence"] = dependence
    return m


def register(d, model):
    st, h, b = d.request("POST", "/v1/models", model)
    check(st in (200, 201), "register %s: %s %r" % (model["name"], st,
                                                   b if st >= 300 else ""))


def run(d, name, body):
    st, h, b = d.request("POST", "/v1/models/%s/checks" % name, body)
    ok = st == 201 and isinstance(b, dict) and b.get("status") == "done"
    check(ok, "%s %s: check done (status %s, %r)"
          % (name, body.get("sampling"), st, b.get("status") if isinstance(b, dict) else b))
    return b if ok else {}


def test_regressions(d):
    register(d, one_input("num-gamma", {"family": "gamma", "shape": 2e5, "scale": 1e-5}))
    for sampling in ("latin_hypercube", "sobol"):
        b = run(d, "num-gamma", {"decision": {"cap": 3}, "samples": 4096, "seed": 2,
                                 "sampling": sampling})
        j = b.get("joint", {})
        check(b.get("verdict") == "pass" and j.get("probability") == 1.0,
              "gamma(2e5, 1e-5) g <= 3 under %s: verdict %r, probability %r"
              % (sampling, b.get("verdict"), j.get("probability")))
    cop = one_input("num-gamma-copula",
                    {"family": "gamma", "shape": 2e5, "scale": 1e-5},
                    dependence=[{"kind": "gaussian_copula", "members": ["v", "z"],
                                 "correlation": {"equal": 0.5}}],
                    extra=[{"name": "z", "distribution": {"family": "normal",
                                                          "mean": 0, "sd": 1}}])
    register(d, cop)
    b = run(d, "num-gamma-copula", {"decision": {"cap": 3}, "samples": 4096,
                                    "seed": 2, "sampling": "monte_carlo"})
    check(b.get("verdict") == "pass" and b.get("joint", {}).get("probability") == 1.0,
          "gamma copula member under monte_carlo: %r %r"
          % (b.get("verdict"), b.get("joint", {}).get("probability")))
    register(d, one_input("num-beta", {"family": "beta", "a": 1e6, "b": 1e6}))
    b = run(d, "num-beta", {"decision": {"cap": 0.5}, "samples": 4096, "seed": 2,
                            "sampling": "latin_hypercube"})
    p = b.get("joint", {}).get("probability", -1)
    check(abs(p - 0.5) < 0.01, "beta(1e6, 1e6) P(v <= 0.5) = %r (1/2 by symmetry)" % p)
    register(d, one_input("num-unif", {"family": "uniform", "low": 0, "high": 1}))
    b = run(d, "num-unif", {"decision": {"cap": 0.5}, "samples": 2000000, "seed": 2,
                            "sampling": "latin_hypercube"})
    iv = b.get("joint", {}).get("interval", {})
    check(iv.get("lower", 1) < 0.5 < iv.get("upper", 0),
          "u <= 0.5 under latin_hypercube, 2M samples: interval %r" % iv)


# (distribution, parameter the pointer must name, text the message must hold)
REFUSED = [
    ({"family": "gamma", "shape": 0.049, "scale": 1}, "shape", "[0.05, 1000000000000]"),
    ({"family": "gamma", "shape": 2e12, "scale": 1}, "shape", "[0.05, 1000000000000]"),
    ({"family": "beta", "a": 0.01, "b": 1}, "a", "[0.05, 1000000000000]"),
    ({"family": "beta", "a": 1, "b": 1e13}, "b", "[0.05, 1000000000000]"),
    ({"family": "student_t", "df": 0.5}, "df", "[1, 1000000000000]"),
    ({"family": "student_t", "df": 1, "scale": 1e12}, "scale", "stays finite"),
    ({"family": "pert", "low": 0, "mode": 1, "high": 3, "shape": 5e12}, "shape",
     "1000000000000"),
]


def test_refusals(d):
    for i, (dist, param, text) in enumerate(REFUSED):
        st, h, b = d.request("POST", "/v1/models", one_input("num-bad-%d" % i, dist))
        ptr = "/uncertain/0/distribution/" + param
        errs = b.get("errors", []) if isinstance(b, dict) else []
        named = [e for e in errs if e.get("pointer") == ptr and text in e.get("message", "")]
        check(is_problem(st, h, b, 400) and named,
              "%r refused with 400 naming %s and %s: %s %r" % (dist, ptr, text, st, errs))


def main():
    if not os.path.exists(BIN):
        print("FEASGATE_BIN %s does not exist" % BIN)
        print("0 passed, 1 failed")
        return 1
    with tempfile.TemporaryDirectory(prefix="feasgate-num-") as tmp:
        d = Daemon("sqlite:%s/num.db" % tmp, results=results)
        if check(d.address is not None, "daemon started"):
            test_regressions(d)
            test_refusals(d)
            check(d.alive(), "daemon still healthy")
        check(d.stop() == 0, "daemon stops cleanly")
    return results.summary()


if __name__ == "__main__":
    sys.exit(main())
