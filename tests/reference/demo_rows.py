"""tests/reference/demo_rows.py -- the demo models' rows recomputed in NumPy.

Shared by test_slack_demo.py and test_drivers_demo.py (not a test itself:
its name does not start with test_). `scenarios` reads samples 0 .. n-1 of
a model's validation stream through `feasgate scenarios` (the stream and
indices a check draws: a draw is a function of seed, stream, column and
index only); `microgrid_rows` and `theatre_rows` compute every constraint
row's excess from those inputs and a candidate's decision, with the
model's own expressions in the model's operation order, so the values are
the engine's to the last bit or nearly (the tests compare them with
`feasgate explain` and with the check's counts).
"""
import json
import os
import subprocess

import numpy as np
from refcommon import BIN, ROOT

DEMO = os.path.join(ROOT, "deploy", "demo")


def load(path):
    with open(path) as f:
        return json.load(f)


def scenario_matrix(model_path, seed, n):
    """Samples 0 .. n-1 of the validation stream: (column names, n x columns
    array), the columns being every scalar input component in the model's
    order (`dur[0]`, ..., `urgent`)."""
    p = subprocess.run([BIN, "scenarios", model_path, "--count", str(n),
                        "--seed", str(seed), "--start", "0", "--stream",
                        "validation", "--csv", "--max", str(n)],
                       capture_output=True, text=True, timeout=900)
    if p.returncode != 0:
        raise RuntimeError("feasgate scenarios failed: " + p.stderr)
    lines = p.stdout.splitlines()
    head = lines[0].split(",")
    # float() reads %.17g back exactly (correctly rounded)
    vals = np.array([[float(v) for v in ln.split(",")] for ln in lines[1:]])
    assert vals.shape == (n, len(head)), vals.shape
    return head, vals


def by_input(head, vals):
    """{input name: n x size array (a vector input) or length-n array}."""
    cols, vector = {}, set()
    for j, h in enumerate(head):
        name = h.split("[")[0]
        if "[" in h:
            vector.add(name)
        cols.setdefault(name, []).append(vals[:, j])
    # vector inputs as n x size arrays, scalars as length-n arrays
    return {k: np.stack(v, axis=1) if k in vector else v[0]
            for k, v in cols.items()}


def scenarios(model_path, seed, n):
    """Samples 0 .. n-1 of the validation stream as {input name: array}."""
    return by_input(*scenario_matrix(model_path, seed, n))


def microgrid_rows(inp, dec):
    """The microgrid-day model's rows, in the model's operation order:
    excess of `net >= -40` is -40 - net, of `charge >= 40` is 40 - charge."""
    gen = np.asarray(dec["gen"], float)
    demand = np.array([38, 46, 52, 55, 57, 60, 58, 56, 59, 66, 78, 85],
                      float) + inp["demand_err"]
    solar = np.array([2, 10, 24, 38, 48, 54, 55, 50, 40, 26, 12, 3],
                     float) * (1 + inp["cloud"])
    net = gen + solar - demand
    flow = np.clip(net, -40, 40)
    run = np.cumsum(flow, axis=1)          # sequential, like running_sum
    charge = np.minimum(120 + run, 200)
    rows = {}
    for h in range(12):
        rows["supply[%d]" % h] = -40 - net[:, h]
    for h in range(12):
        rows["reserve[%d]" % h] = 40 - charge[:, h]
    return rows


def theatre_rows(inp, dec):
    """The theatre-list model's rows: leave by the `elements` recursion,
    wait = above_zero(previous leave - start), session_end with 55 minutes
    per urgent case."""
    start = np.asarray(dec["start"], float)
    late = float(dec["late_team"])
    dur, turn, urgent = inp["dur"], inp["turnover"], inp["urgent"]
    leave = np.empty_like(dur)
    leave[:, 0] = start[0] + dur[:, 0] + turn[:, 0]
    for i in range(1, 6):
        leave[:, i] = np.maximum(start[i], leave[:, i - 1]) + dur[:, i] + turn[:, i]
    prev = np.concatenate([np.zeros((dur.shape[0], 1)), leave[:, :5]], axis=1)
    wait = np.maximum(prev - start, 0)
    session_end = leave[:, 5] + 55 * urgent
    rows = {"overrun": session_end - (540 + 150 * late)}
    for i in range(6):
        rows["patient_wait[%d]" % i] = wait[:, i] - 60
    return rows


# (model name, rows from (inputs, decision))
MODELS = [("microgrid-day", microgrid_rows), ("theatre-list", theatre_rows)]
