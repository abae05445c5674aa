#!/usr/bin/python3
"""Checks of schemas/: the JSON Schemas and the OpenAPI document.

- every schemas/*.schema.json is a valid JSON Schema 2020-12 (the validator's
  own meta-schema check) and every "$ref" in it resolves;
- schemas/openapi.json parses, is OpenAPI 3.1, is up to date with the schema
  files (schemas/build_openapi.py --check), describes every path of the API
  with problem documents for errors, and every "$ref" in it resolves inside
  the document;
- hand-written sample documents and bodies (below) are accepted or refused
  as expected, both by the schema files and by the schemas embedded in the
  OpenAPI document.

Needs Debian's python3-jsonschema; run with /usr/bin/python3. Reads only the
repository. The last line is "N passed, N failed"; the exit status is 1 when
anything failed.
"""
import copy
import importlib.util
import json
import sys
from pathlib import Path

import jsonschema
from jsonschema import Draft202012Validator

ROOT = Path(__file__).resolve().parents[2]
SCHEMAS = ROOT / "schemas"

SCHEMA_FILES = [
    "model.schema.json", "check-request.schema.json", "check-result.schema.json",
    "problem.schema.json", "model-registered.schema.json",
    "model-version.schema.json", "model-list.schema.json",
    "check-list.schema.json", "comparison-request.schema.json",
    "comparison-result.schema.json", "scenarios.schema.json",
    "sample-size.schema.json", "health.schema.json", "limits.schema.json",
    "explained-scenario.schema.json", "replay-result.schema.json",
    "sample-model-request.schema.json", "sample-model.schema.json",
]

passed = 0
failed = 0


def check(name, ok, detail=""):
    global passed, failed
    if ok:
        passed += 1
    else:
        failed += 1
        print("FAIL %s%s" % (name, (": " + detail) if detail else ""))


def load_json(path):
    with open(path, encoding="utf-8") as f:
        return json.load(f)


def pointer_get(doc, pointer):
    """Follow a JSON Pointer (RFC 6901); KeyError/IndexError when absent."""
    node = doc
    if pointer == "":
        return node
    if not pointer.startswith("/"):
        raise KeyError(pointer)
    for token in pointer[1:].split("/"):
        token = token.replace("~1", "/").replace("~0", "~")
        node = node[int(token)] if isinstance(node, list) else node[token]
    return node


def refs_in(node, where=""):
    if isinstance(node, dict):
        for k, v in node.items():
            if k == "$ref" and isinstance(v, str):
                yield where, v
            else:
                yield from refs_in(v, where + "/" + k.replace("~", "~0").replace("/", "~1"))
    elif isinstance(node, list):
        for i, v in enumerate(node):
            yield from refs_in(v, "%s/%d" % (where, i))


# ---- validators that resolve offline --------------------------------------
# No schema carries an "$id", so a file's references resolve against its own
# location: "check-result.schema.json#/$defs/x" means that sibling file.
# schemas/validator.py registers every document under a base that is never
# fetched and starts from a reference to the document wanted.

sys.path.insert(0, str(SCHEMAS))
from validator import make_validator  # noqa: E402


# ---- sample documents and bodies (invented for these tests) ---------------

DIGEST = "sha256:" + "3f" * 32
DIGEST2 = "sha256:" + "0123456789abcdef" * 4

WATER_POINTS = {
    "format": 1,
    "name": "festival-water.east",
    "title": "Water points, east field, festival day two",
    "description": "Three water points filled by volunteer crews; some water is lost to leaks.",
    "decisions": [
        {"name": "tanks", "size": 3, "lower": 0, "upper": [900, 650, 420], "integer": True},
        {"name": "crews", "lower": 1, "upper": 4, "integer": True},
        {"name": "reserve_share", "lower": 0.0, "upper": 0.3},
    ],
    "uncertain": [
        {"name": "visitors", "size": 3,
         "distribution": {"family": "gamma", "shape": [9, 6, 4], "scale": [55, 60, 70]}},
        {"name": "heat_hours",
         "distribution": {"family": "pert", "low": 2, "mode": 3, "high": 8}},
        {"name": "leak",
         "distribution": {"family": "beta", "a": 2, "b": 38, "low": 0, "high": 0.5}},
        {"name": "refills", "distribution": {"family": "poisson", "mean": 4.5}},
    ],
    "dependence": [
        {"kind": "gaussian_copula", "members": ["visitors", "heat_hours"],
         "correlation": {"ar1": 0.4}},
    ],
    "definitions": [
        {"name": "held", "value": "tanks * (1 - leak) + refills / 3"},
        {"name": "drawn", "value": "visitors * heat_hours / 7 * (1 + reserve_share)"},
        {"name": "spare", "elements": [
            "above_zero(held[0] - drawn[0])",
            "spare[0] + above_zero(held[1] - drawn[1])",
            "spare[1] + above_zero(held[2] - drawn[2])"]},
    ],
    "constraints": [
        {"name": "no_shortfall", "require": "drawn <= held"},
        {"name": "crew_load", "require": "sum(tanks) <= 600 * crews"},
        {"name": "overflow", "require": "0 <= spare[2] <= 350"},
    ],
    "objective": {"minimize": "dot([2.1, 3.4, 5.0], tanks) + 950 * crews"},
    "target": {"probability": 0.95, "confidence": 0.99},
}


def model_with(**changes):
    doc = copy.deepcopy(WATER_POINTS)
    for k, v in changes.items():
        if v is None:
            doc.pop(k, None)
        else:
            doc[k] = v
    return doc


def one_input(distribution, size=None, dependence=None):
    """A small grain-silo model around one uncertain input."""
    u = {"name": "inflow", "distribution": distribution}
    if size is not None:
        u["size"] = size
    doc = {
        "format": 1,
        "name": "silo-7",
        "decisions": [{"name": "capacity", "lower": 0}],
        "uncertain": [u],
        "constraints": [{"name": "fits", "require": "sum(inflow) <= capacity"}],
    }
    if dependence is not None:
        doc["dependence"] = dependence
    return doc


MODEL_VALID = [
    ("water-point model", WATER_POINTS),
    ("no uncertain inputs, maximize", {
        "format": 1, "name": "0-fixed", "decisions": [{"name": "x"}], "uncertain": [],
        "constraints": [{"name": "c", "require": "x >= 1"}],
        "objective": {"maximize": "x"}}),
    ("target with probability only", model_with(target={"probability": 0.8})),
    ("no optional members", model_with(title=None, description=None, dependence=None,
                                       definitions=None, objective=None, target=None)),
    ("normal truncated", one_input({"family": "normal", "mean": 40, "sd": 6, "lower": 0})),
    ("normal per element", one_input({"family": "normal", "mean": [40, 50], "sd": [5, 7]}, size=2)),
    ("lognormal meanlog/sdlog", one_input({"family": "lognormal", "meanlog": 3.2, "sdlog": 0.25})),
    ("lognormal mean/sd", one_input({"family": "lognormal", "mean": 24.0, "sd": 6.5})),
    ("uniform", one_input({"family": "uniform", "low": 10, "high": 14})),
    ("triangular", one_input({"family": "triangular", "low": 1, "mode": 2, "high": 6})),
    ("pert with shape", one_input({"family": "pert", "low": 1, "mode": 2, "high": 6, "shape": 3})),
    ("exponential", one_input({"family": "exponential", "mean": 12.5})),
    ("weibull", one_input({"family": "weibull", "shape": 1.7, "scale": 30})),
    ("student_t", one_input({"family": "student_t", "df": 5, "location": 20, "scale": 2})),
    ("binomial", one_input({"family": "binomial", "trials": 40, "p": 0.07})),
    ("discrete", one_input({"family": "discrete", "values": [0, 10, 25], "weights": [5, 3, 1]})),
    ("discrete per element", one_input({"family": "discrete",
                                        "values": [[0, 1], [2, 3, 4]],
                                        "weights": [[1, 1], [1, 2, 1]]}, size=2)),
    ("empirical", one_input({"family": "empirical", "data": [11.2, 9.8, 14.1, 10.5]})),
    ("multivariate_normal covariance", one_input(
        {"family": "multivariate_normal", "mean": [30, 45],
         "covariance": [[16, 4.8], [4.8, 25]]}, size=2)),
    ("multivariate_normal sd+correlation", one_input(
        {"family": "multivariate_normal", "mean": [30, 45, 20], "sd": [4, 5, 3],
         "correlation": {"equal": 0.2}}, size=3)),
    ("scenario_table with weights", one_input(
        {"family": "scenario_table", "rows": [[31, 40], [28, 52], [35, 47]],
         "weights": [2, 1, 1]}, size=2)),
    ("copula with full matrix", one_input(
        {"family": "gamma", "shape": 3, "scale": 10}, size=2,
        dependence=[{"kind": "gaussian_copula", "members": ["inflow"],
                     "correlation": [[1, -0.3], [-0.3, 1]]}])),
]

MODEL_INVALID = [
    ("format 2", model_with(format=2)),
    ("format as text", model_with(format="1")),
    ("name with capitals", model_with(name="Festival")),
    ("name starting with a dot", model_with(name=".festival")),
    ("name of 65 characters", model_with(name="a" * 65)),
    ("constraints missing", model_with(constraints=None)),
    ("constraints empty", model_with(constraints=[])),
    ("uncertain missing", model_with(uncertain=None)),
    ("decisions missing", model_with(decisions=None)),
    ("unknown top-level member", dict(WATER_POINTS, solver="x")),
    ("decision named like a function", model_with(decisions=[{"name": "sum"}])),
    ("decision name starting with a digit", model_with(decisions=[{"name": "2x"}])),
    ("decision size 0", model_with(decisions=[{"name": "x", "size": 0}])),
    ("decision size fractional", model_with(decisions=[{"name": "x", "size": 2.5}])),
    ("decision with unknown member", model_with(decisions=[{"name": "x", "step": 1}])),
    ("decision bound as text", model_with(decisions=[{"name": "x", "lower": "0"}])),
    ("unknown family", one_input({"family": "cauchy", "location": 0, "scale": 1})),
    ("family missing", one_input({"mean": 1, "sd": 1})),
    ("normal without sd", one_input({"family": "normal", "mean": 3})),
    ("normal with negative sd", one_input({"family": "normal", "mean": 3, "sd": -1})),
    ("normal with a negative sd element", one_input({"family": "normal", "mean": 3, "sd": [1, -2]}, size=2)),
    ("normal with empty array", one_input({"family": "normal", "mean": [], "sd": 1})),
    ("normal with stray parameter", one_input({"family": "normal", "mean": 3, "sd": 1, "mode": 2})),
    ("lognormal mixing parametrisations", one_input({"family": "lognormal", "meanlog": 1, "sd": 2})),
    ("lognormal with all four", one_input({"family": "lognormal", "meanlog": 1, "sdlog": 0.2,
                                           "mean": 3, "sd": 1})),
    ("lognormal with non-positive mean", one_input({"family": "lognormal", "mean": 0, "sd": 1})),
    ("uniform without high", one_input({"family": "uniform", "low": 0})),
    ("triangular without mode", one_input({"family": "triangular", "low": 0, "high": 2})),
    ("gamma with zero shape", one_input({"family": "gamma", "shape": 0, "scale": 1})),
    ("beta missing b", one_input({"family": "beta", "a": 2})),
    ("binomial p above 1", one_input({"family": "binomial", "trials": 10, "p": 1.5})),
    ("binomial fractional trials", one_input({"family": "binomial", "trials": 2.5, "p": 0.5})),
    ("discrete negative weight", one_input({"family": "discrete", "values": [1, 2], "weights": [1, -1]})),
    ("discrete without weights", one_input({"family": "discrete", "values": [1, 2]})),
    ("empirical with no data", one_input({"family": "empirical", "data": []})),
    ("multivariate_normal without size", one_input(
        {"family": "multivariate_normal", "mean": [1, 2], "covariance": [[1, 0], [0, 1]]})),
    ("multivariate_normal with both forms", one_input(
        {"family": "multivariate_normal", "mean": [1, 2], "covariance": [[1, 0], [0, 1]],
         "sd": [1, 1], "correlation": {"equal": 0.1}}, size=2)),
    ("multivariate_normal sd without correlation", one_input(
        {"family": "multivariate_normal", "mean": [1, 2], "sd": [1, 1]}, size=2)),
    ("scenario_table rows of numbers", one_input(
        {"family": "scenario_table", "rows": [1, 2, 3]})),
    ("copula kind t_copula", one_input(
        {"family": "gamma", "shape": 3, "scale": 10}, size=2,
        dependence=[{"kind": "t_copula", "members": ["inflow"], "correlation": {"equal": 0.3}}])),
    ("copula equal 1.5", one_input(
        {"family": "gamma", "shape": 3, "scale": 10}, size=2,
        dependence=[{"kind": "gaussian_copula", "members": ["inflow"], "correlation": {"equal": 1.5}}])),
    ("copula with both equal and ar1", one_input(
        {"family": "gamma", "shape": 3, "scale": 10}, size=2,
        dependence=[{"kind": "gaussian_copula", "members": ["inflow"],
                     "correlation": {"equal": 0.2, "ar1": 0.2}}])),
    ("copula matrix entry 2", one_input(
        {"family": "gamma", "shape": 3, "scale": 10}, size=2,
        dependence=[{"kind": "gaussian_copula", "members": ["inflow"],
                     "correlation": [[1, 2], [2, 1]]}])),
    ("copula without members", one_input(
        {"family": "gamma", "shape": 3, "scale": 10}, size=2,
        dependence=[{"kind": "gaussian_copula", "members": [], "correlation": {"ar1": 0.2}}])),
    ("definition with value and elements", model_with(definitions=[
        {"name": "d", "value": "1", "elements": ["1"]}])),
    ("definition with neither", model_with(definitions=[{"name": "d"}])),
    ("definition with empty elements", model_with(definitions=[{"name": "d", "elements": []}])),
    ("constraint without require", model_with(constraints=[{"name": "c"}])),
    ("constraint with blank require", model_with(constraints=[{"name": "c", "require": "   "}])),
    ("constraint with numeric require", model_with(constraints=[{"name": "c", "require": 3}])),
    ("objective with both senses", model_with(objective={"minimize": "x", "maximize": "x"})),
    ("objective with unknown sense", model_with(objective={"optimise": "x"})),
    ("target probability 1", model_with(target={"probability": 1.0})),
    ("target with unknown member", model_with(target={"probability": 0.9, "level": 0.95})),
]

CHECK_REQUEST_VALID = [
    ("decision only", {"decision": {"tanks": [420, 300, 180], "crews": 2, "reserve_share": 0.1}}),
    ("every member", {
        "decision": {"tanks": [420, 300, 180], "crews": 2, "reserve_share": 0.1},
        "samples": 250000, "seed": 90210, "target": 0.95, "confidence": 0.99,
        "interval": "wilson", "stop_early": True, "sampling": "latin_hypercube",
        "expect_digest": DIGEST, "in_sample": {"seed": 3, "count": 400},
        "label": "water plan day 2", "wait_s": 0}),
    ("empty decision", {"decision": {}}),
]

CHECK_REQUEST_INVALID = [
    ("no decision", {"samples": 1000}),
    ("decision as array", {"decision": [1, 2]}),
    ("decision value as text", {"decision": {"crews": "2"}}),
    ("decision value empty array", {"decision": {"tanks": []}}),
    ("decision name invalid", {"decision": {"tanks-1": 3}}),
    ("samples 0", {"decision": {}, "samples": 0}),
    ("samples fractional", {"decision": {}, "samples": 10.5}),
    ("seed negative", {"decision": {}, "seed": -1}),
    ("seed above 2^53-1", {"decision": {}, "seed": 9007199254740992}),
    ("target 0", {"decision": {}, "target": 0}),
    ("unknown interval", {"decision": {}, "interval": "wald"}),
    ("unknown sampling", {"decision": {}, "sampling": "quasi"}),
    ("bad digest", {"decision": {}, "expect_digest": "sha256:ABC"}),
    ("in_sample without count", {"decision": {}, "in_sample": {"seed": 1}}),
    ("negative wait", {"decision": {}, "wait_s": -1}),
    ("unknown member", {"decision": {}, "sample": 1000}),
    ("stop_early as text", {"decision": {}, "stop_early": "yes"}),
]

CHECK_DONE = {
    "id": "chk_01JDQ4R8ZK3M5N7P9Q1S3T5V7X",
    "status": "done",
    "model": {"name": "festival-water.east", "version": 2, "digest": DIGEST},
    "verdict": "inconclusive",
    "target": 0.95,
    "confidence": 0.99,
    "seed": 90210,
    "sampling": "monte_carlo",
    "joint": {"samples": 100000, "satisfied": 95071, "probability": 0.95071,
              "std_error": 0.000685,
              "interval": {"lower": 0.94891, "upper": 0.95248, "method": "clopper_pearson"}},
    "constraints": [
        {"name": "no_shortfall[2]", "violated": 3712, "probability": 0.03712,
         "interval": {"lower": 0.03558, "upper": 0.03871},
         "excess": {"mean": 0.41, "mean_if_violated": 11.0, "p95": 27.5, "max": 88.2},
         "sole_cause": 3100, "nonfinite": 0},
        {"name": "crew_load", "violated": 0, "probability": 0.0,
         "interval": {"lower": 0.0, "upper": 0.0000529},
         "excess": {"mean": 0.0, "mean_if_violated": None, "p95": None, "max": None},
         "sole_cause": 0, "nonfinite": 0, "deterministic": True},
    ],
    "deterministic": {"ok": True, "problems": []},
    "numeric": {"ok": True, "problems": []},
    "objective": 4386.5,
    "failing_scenarios": [{"index": 41, "violated": ["no_shortfall[2]"]},
                          {"index": 97, "violated": ["no_shortfall[0]", "overflow"]}],
    "in_sample": {"count": 400, "satisfied": 389, "fraction": 0.9725},
    "samples_to_settle": 742000,
    "stopped_early": False,
    "created_at": "2026-11-30T08:15:02Z",
    "finished_at": "2026-11-30T08:15:03.250Z",
    "elapsed_ms": 1250,
    "label": "water plan day 2",
    "key": "pipeline",
    "served_by": "replica-2",
}

CHECK_RUNNING = {
    "id": "chk_01JDQ4S0AB",
    "status": "running",
    "model": {"name": "festival-water.east", "version": 2, "digest": DIGEST},
    "verdict": None,
    "target": 0.95, "confidence": 0.99, "seed": 7,
    "created_at": "2026-11-30T08:16:00+01:00",
    "finished_at": None,
    "label": None,
    "progress": {"samples_done": 32768, "probability": 0.9502,
                 "interval": {"lower": 0.947, "upper": 0.9533, "method": "clopper_pearson"}},
}

CHECK_CANCELLED = {
    "id": "chk_01JDQ4S9CD",
    "status": "cancelled",
    "model": {"name": "silo-7", "version": 1, "digest": DIGEST2},
    "verdict": None,
    "target": 0.9, "confidence": 0.95, "seed": 0,
    "joint": {"samples": 0, "satisfied": 0, "probability": None, "std_error": None,
              "interval": {"lower": 0, "upper": 1, "method": "clopper_pearson"}},
    "created_at": "2026-11-30T08:17:00Z",
    "finished_at": "2026-11-30T08:17:01Z",
    "label": None,
}


def changed(doc, pointer, value):
    doc = copy.deepcopy(doc)
    parent, _, last = pointer.rpartition("/")
    node = pointer_get(doc, parent)
    if value is REMOVE:
        del node[int(last) if isinstance(node, list) else last]
    elif isinstance(node, list):
        node[int(last)] = value
    else:
        node[last] = value
    return doc


REMOVE = object()

CHECK_RESULT_VALID = [
    ("done", CHECK_DONE),
    ("running with progress", CHECK_RUNNING),
    ("running before the first block", changed(CHECK_RUNNING, "/progress",
                                               {"samples_done": 0, "probability": None,
                                                "interval": None})),
    ("cancelled with no samples", CHECK_CANCELLED),
    ("done after stop_early", changed(changed(CHECK_DONE, "/joint/interval/method",
                                              "confidence_sequence"), "/stopped_early", True)),
    ("done with a decision problem", changed(changed(CHECK_DONE, "/verdict", "fail"),
                                             "/decision_problems",
                                             [{"name": "crews", "message": "2.5 is not an integer"}])),
    ("done without objective", changed(CHECK_DONE, "/objective", None)),
    ("done with a NaN row", changed(changed(CHECK_DONE, "/constraints/0/nonfinite", 12),
                                    "/numeric",
                                    {"ok": False, "problems": [
                                        {"name": "no_shortfall[2]", "kind": "row",
                                         "stream": "validation", "index": 41, "count": 12,
                                         "message": "evaluated to NaN"},
                                        {"name": "demand[1]", "kind": "input",
                                         "stream": "design", "index": 3, "count": 1,
                                         "message": "drew a non-finite value"}]})),
    ("failed", changed(CHECK_CANCELLED, "/status", "failed")),
    ("interrupted", changed(CHECK_RUNNING, "/status", "interrupted")),
]

CHECK_RESULT_INVALID = [
    ("unknown status", changed(CHECK_DONE, "/status", "finished")),
    ("unknown verdict", changed(CHECK_DONE, "/verdict", "maybe")),
    ("done with null verdict", changed(CHECK_DONE, "/verdict", None)),
    ("done without joint", changed(CHECK_DONE, "/joint", REMOVE)),
    ("done without numeric", changed(CHECK_DONE, "/numeric", REMOVE)),
    ("row without nonfinite", changed(CHECK_DONE, "/constraints/0/nonfinite", REMOVE)),
    ("numeric problem without index", changed(CHECK_DONE, "/numeric/problems",
                                              [{"name": "c", "kind": "row", "count": 1,
                                                "stream": "validation", "message": "NaN"}])),
    ("numeric problem of unknown kind", changed(CHECK_DONE, "/numeric/problems",
                                                [{"name": "c", "kind": "draw", "index": 0,
                                                  "stream": "validation", "count": 1,
                                                  "message": "NaN"}])),
    ("done without finished_at", changed(CHECK_DONE, "/finished_at", REMOVE)),
    ("done with null probability", changed(CHECK_DONE, "/joint/probability", None)),
    ("running without progress", changed(CHECK_RUNNING, "/progress", REMOVE)),
    ("running with a verdict", changed(CHECK_RUNNING, "/verdict", "pass")),
    ("bad id", changed(CHECK_DONE, "/id", "check-17")),
    ("digest upper case", changed(CHECK_DONE, "/model/digest", "sha256:" + "AB" * 32)),
    ("digest without prefix", changed(CHECK_DONE, "/model/digest", "ab" * 32)),
    ("probability above 1", changed(CHECK_DONE, "/joint/probability", 1.2)),
    ("interval without method", changed(CHECK_DONE, "/joint/interval/method", REMOVE)),
    ("negative violated", changed(CHECK_DONE, "/constraints/0/violated", -1)),
    ("row without excess", changed(CHECK_DONE, "/constraints/0/excess", REMOVE)),
    ("excess without p95", changed(CHECK_DONE, "/constraints/0/excess/p95", REMOVE)),
    ("bad row name", changed(CHECK_DONE, "/constraints/0/name", "no stockout")),
    ("101 failing scenarios", changed(CHECK_DONE, "/failing_scenarios",
                                      [{"index": i, "violated": ["crew_load"]} for i in range(101)])),
    ("drivers not a list", changed(CHECK_DONE, "/constraints/0/drivers", 1.5)),
    ("negative slack", changed(CHECK_DONE, "/constraints/0/slack_to_target", -0.5)),
    ("failing scenario without rows", changed(CHECK_DONE, "/failing_scenarios",
                                              [{"index": 3, "violated": []}])),
    ("objective as text", changed(CHECK_DONE, "/objective", "4386.5")),
    ("samples_to_settle fractional", changed(CHECK_DONE, "/samples_to_settle", 10.5)),
    ("created_at not RFC 3339", changed(CHECK_DONE, "/created_at", "30/11/2026 08:15")),
    ("in_sample without fraction", changed(CHECK_DONE, "/in_sample", {"count": 4, "satisfied": 3})),
    ("deterministic without problems", changed(CHECK_DONE, "/deterministic", {"ok": True})),
    ("label missing", changed(CHECK_DONE, "/label", REMOVE)),
]

PROBLEM_VALID = [
    ("expression fault", {
        "type": "about:blank", "title": "invalid input", "status": 400,
        "detail": "The model document has 1 error.",
        "errors": [{"pointer": "/constraints/1/require", "column": 12,
                    "message": "unknown name 'usabel'"}]}),
    ("limit", {
        "type": "about:blank", "title": "limit exceeded", "status": 413,
        "detail": "The body is larger than the body-size limit.",
        "limit": {"name": "body_bytes", "value": 16777216}}),
    ("malformed JSON", {
        "type": "about:blank", "title": "malformed JSON", "status": 400,
        "detail": "Expected ',' or '}'.", "offset": 1032,
        "errors": [{"pointer": "", "message": "parsing stopped here"}]}),
    ("pointer with escapes", {
        "type": "about:blank", "title": "invalid input", "status": 400, "detail": "x",
        "errors": [{"pointer": "/decision/a~1b~0c", "message": "unknown decision"}]}),
]

PROBLEM_INVALID = [
    ("no status", {"type": "about:blank", "title": "x", "detail": "y"}),
    ("status 200", {"type": "about:blank", "title": "x", "status": 200, "detail": "y"}),
    ("status as text", {"type": "about:blank", "title": "x", "status": "400", "detail": "y"}),
    ("column 0", {"type": "about:blank", "title": "x", "status": 400, "detail": "y",
                  "errors": [{"pointer": "/a", "column": 0, "message": "m"}]}),
    ("pointer without slash", {"type": "about:blank", "title": "x", "status": 400, "detail": "y",
                               "errors": [{"pointer": "constraints/1", "message": "m"}]}),
    ("pointer with bad escape", {"type": "about:blank", "title": "x", "status": 400, "detail": "y",
                                 "errors": [{"pointer": "/a~2", "message": "m"}]}),
    ("error without message", {"type": "about:blank", "title": "x", "status": 400, "detail": "y",
                               "errors": [{"pointer": "/a"}]}),
    ("limit without value", {"type": "about:blank", "title": "x", "status": 400, "detail": "y",
                             "limit": {"name": "vector_length"}}),
    ("negative offset", {"type": "about:blank", "title": "x", "status": 400, "detail": "y",
                         "offset": -1}),
]

SUMMARY = {"decisions": 3, "decision_dims": 5, "uncertain": 4, "uncertain_dims": 6,
           "definitions": 3, "constraints": 3, "rows": 5, "deterministic_rows": 1,
           "objective": True}
REGISTERED = {"name": "festival-water.east", "version": 2, "digest": DIGEST,
              "created_at": "2026-11-29T17:00:00Z", "summary": SUMMARY}

REGISTERED_VALID = [("registered", REGISTERED)]
REGISTERED_INVALID = [
    ("version 0", changed(REGISTERED, "/version", 0)),
    ("short digest", changed(REGISTERED, "/digest", "sha256:abc")),
    ("no summary", changed(REGISTERED, "/summary", REMOVE)),
    ("summary without rows", changed(REGISTERED, "/summary/rows", REMOVE)),
]

VERSION = dict(REGISTERED, document=WATER_POINTS)
VERSION_VALID = [("version with document", VERSION)]
VERSION_INVALID = [
    ("no document", changed(VERSION, "/document", REMOVE)),
    ("document breaks the model schema", changed(VERSION, "/document/format", 3)),
]

MODEL_LIST_VALID = [
    ("two models", {"models": [
        {"name": "festival-water.east", "version": 2, "digest": DIGEST,
         "created_at": "2026-11-29T17:00:00Z", "title": "Water points, east field, festival day two"},
        {"name": "silo-7", "version": 1, "digest": DIGEST2,
         "created_at": "2026-11-20T09:30:00Z", "title": None}]}),
    ("none", {"models": []}),
]
MODEL_LIST_INVALID = [
    ("no models member", {}),
    ("entry without digest", {"models": [{"name": "silo-7", "version": 1,
                                          "created_at": "2026-11-20T09:30:00Z", "title": None}]}),
]

CHECK_SUMMARY = {"id": "chk_01JDQ4R8ZK", "status": "done",
                 "model": {"name": "silo-7", "version": 1, "digest": DIGEST2},
                 "verdict": "pass",
                 "joint": {"probability": 0.9412,
                           "interval": {"lower": 0.9371, "upper": 0.9451,
                                        "method": "clopper_pearson"}},
                 "created_at": "2026-11-30T08:15:02Z", "label": None, "key": "dashboard"}
CHECK_LIST_VALID = [
    ("a page", {"checks": [CHECK_SUMMARY, changed(CHECK_SUMMARY, "/joint", None)],
                "next": "c2026113008150200017"}),
    ("last page", {"checks": [], "next": None}),
]
CHECK_LIST_INVALID = [
    ("no next", {"checks": []}),
    ("summary without verdict", {"checks": [changed(CHECK_SUMMARY, "/verdict", REMOVE)],
                                 "next": None}),
    ("summary with bad status", {"checks": [changed(CHECK_SUMMARY, "/status", "ok")],
                                 "next": None}),
]

COMPARISON_REQUEST_VALID = [
    ("two plans", {"candidates": [
        {"label": "lean", "decision": {"tanks": [380, 280, 160], "crews": 2, "reserve_share": 0}},
        {"label": "safe", "decision": {"tanks": [460, 330, 200], "crews": 2, "reserve_share": 0.2}}],
        "samples": 200000, "seed": 5, "interval": "jeffreys", "expect_digest": DIGEST}),
]
COMPARISON_REQUEST_INVALID = [
    ("one candidate", {"candidates": [{"label": "lean", "decision": {}}]}),
    ("coupled design", {"candidates": [{"label": "a", "decision": {}},
                                       {"label": "b", "decision": {}}],
                        "sampling": "antithetic"}),
    ("candidate without label", {"candidates": [{"decision": {}}, {"label": "b", "decision": {}}]}),
    ("candidate with unknown member", {"candidates": [
        {"label": "a", "decision": {}, "seed": 1}, {"label": "b", "decision": {}}]}),
    ("unknown member", {"candidates": [{"label": "a", "decision": {}},
                                       {"label": "b", "decision": {}}], "pairs": []}),
]

COMPARISON_RESULT_VALID = [
    ("two candidates", {
        "candidates": [dict(CHECK_DONE, label="lean"),
                       dict(CHECK_DONE, id="chk_01JDQ4R8ZM", label="safe", verdict="pass")],
        "pairs": [{"a": "lean", "b": "safe", "a_only": 12, "b_only": 4870,
                   "difference": -0.02429, "interval": {"lower": -0.0250, "upper": -0.0236}}]}),
]
COMPARISON_RESULT_INVALID = [
    ("candidate without label", {"candidates": [dict(CHECK_DONE, label=None)], "pairs": []}),
    ("candidate breaking the check schema", {
        "candidates": [dict(CHECK_DONE, label="x", status="finished")], "pairs": []}),
    ("difference below -1", {"candidates": [], "pairs": [
        {"a": "x", "b": "y", "a_only": 0, "b_only": 0, "difference": -2,
         "interval": {"lower": -1, "upper": 1}}]}),
    ("pair without interval", {"candidates": [], "pairs": [
        {"a": "x", "b": "y", "a_only": 0, "b_only": 0, "difference": 0}]}),
]

SCENARIOS_VALID = [
    ("two scenarios", {"columns": ["visitors[0]", "visitors[1]", "visitors[2]", "heat_hours",
                                   "leak", "refills"],
                       "rows": [[512.3, 344.0, 301.9, 3.4, 0.041, 5],
                                [478.8, 390.2, 255.0, 2.9, 0.066, 3]],
                       "seed": 7, "stream": "design", "start": 0}),
]
SCENARIOS_INVALID = [
    ("unknown stream", {"columns": [], "rows": [], "seed": 7, "stream": "test", "start": 0}),
    ("no seed", {"columns": [], "rows": [], "stream": "design", "start": 0}),
    ("text cell", {"columns": ["x"], "rows": [["1"]], "seed": 7, "stream": "design", "start": 0}),
]

EXPLAINED_VALID = [
    ("a failing scenario", {"check": "chk_01M8VET64AF0E7EPWMFKVX9T6T", "index": 3,
                            "seed": 42, "stream": "validation", "sampling": "monte_carlo",
                            "inputs": {"dur": [3.4, 2.5, 5.1], "extra": 1.06},
                            "definitions": {"total": 12.1},
                            "rows": [{"name": "fits", "excess": 1.12, "holds": False},
                                     {"name": "each[2]", "excess": None, "holds": False}],
                            "holds": False}),
]
EXPLAINED_INVALID = [
    ("design stream", {"index": 0, "seed": 1, "stream": "design", "sampling": "monte_carlo",
                       "inputs": {}, "definitions": {}, "rows": [], "holds": True}),
    ("sobol", {"index": 0, "seed": 1, "stream": "validation", "sampling": "sobol",
               "inputs": {}, "definitions": {}, "rows": [], "holds": True}),
    ("row without holds", {"index": 0, "seed": 1, "stream": "validation",
                           "sampling": "monte_carlo", "inputs": {}, "definitions": {},
                           "rows": [{"name": "a", "excess": 1}], "holds": False}),
]
REPLAY_VALID = [
    ("reproduced", {"check": "chk_A", "replay": "chk_B", "reproduced": True,
                    "differences": []}),
    ("running", {"check": "chk_A", "replay": "chk_B", "reproduced": None,
                 "differences": []}),
]
REPLAY_INVALID = [
    ("no reproduced", {"check": "chk_A", "replay": "chk_B", "differences": []}),
    ("difference without field", {"check": "chk_A", "replay": None, "reproduced": False,
                                  "differences": [{"original": 1, "replay": 2}]}),
]

SAMPLE_SIZE_VALID = [
    ("half-width", {"half_width": 0.002, "confidence": 0.95, "samples": 240092,
                    "method": "normal_approximation"}),
    ("power", {"target": 0.9, "probability": 0.93, "confidence": 0.95, "power": 0.9,
               "samples": 1045, "method": "normal_approximation_power"}),
    ("scenario approach", {"epsilon": 0.05, "beta": 1e-6, "decisions": 12, "discarded": 0,
                           "scenarios": 727, "method": "scenario_approach_binomial_tail"}),
]
SAMPLE_SIZE_INVALID = [
    ("no method", {"half_width": 0.002, "confidence": 0.95, "samples": 240092}),
    ("no answer", {"half_width": 0.002, "confidence": 0.95, "method": "x"}),
    ("epsilon 0", {"epsilon": 0, "beta": 1e-6, "decisions": 12, "scenarios": 727, "method": "x"}),
]

HEALTH_VALID = [("ok", {"status": "ok"})]
HEALTH_INVALID = [("degraded", {"status": "degraded"}), ("empty", {})]

LIMITS_VALID = [("limits", {"limits": [{"name": "vector_length", "value": 100000},
                                        {"name": "expression_depth", "value": 64},
                                        {"name": "body_bytes", "value": 16777216}]})]
LIMITS_INVALID = [
    ("as an object", {"limits": {"vector_length": 100000}}),
    ("entry without value", {"limits": [{"name": "vector_length"}]}),
    ("name with capitals", {"limits": [{"name": "VectorLength", "value": 1}]}),
]

SAMPLES = [
    ("model.schema.json", MODEL_VALID, MODEL_INVALID),
    ("check-request.schema.json", CHECK_REQUEST_VALID, CHECK_REQUEST_INVALID),
    ("check-result.schema.json", CHECK_RESULT_VALID, CHECK_RESULT_INVALID),
    ("problem.schema.json", PROBLEM_VALID, PROBLEM_INVALID),
    ("model-registered.schema.json", REGISTERED_VALID, REGISTERED_INVALID),
    ("model-version.schema.json", VERSION_VALID, VERSION_INVALID),
    ("model-list.schema.json", MODEL_LIST_VALID, MODEL_LIST_INVALID),
    ("check-list.schema.json", CHECK_LIST_VALID, CHECK_LIST_INVALID),
    ("comparison-request.schema.json", COMPARISON_REQUEST_VALID, COMPARISON_REQUEST_INVALID),
    ("comparison-result.schema.json", COMPARISON_RESULT_VALID, COMPARISON_RESULT_INVALID),
    ("scenarios.schema.json", SCENARIOS_VALID, SCENARIOS_INVALID),
    ("explained-scenario.schema.json", EXPLAINED_VALID, EXPLAINED_INVALID),
    ("replay-result.schema.json", REPLAY_VALID, REPLAY_INVALID),
    ("sample-size.schema.json", SAMPLE_SIZE_VALID, SAMPLE_SIZE_INVALID),
    ("health.schema.json", HEALTH_VALID, HEALTH_INVALID),
    ("limits.schema.json", LIMITS_VALID, LIMITS_INVALID),
]

# ---- the API surface the OpenAPI document must describe --------------------

EXPECTED_OPERATIONS = {
    ("/v1/models", "post"), ("/v1/models", "get"),
    ("/v1/models/{name}", "get"), ("/v1/models/{name}", "delete"),
    ("/v1/models/{name}/versions/{n}", "get"),
    ("/v1/models/{name}/checks", "post"),
    ("/v1/models/{name}/versions/{n}/checks", "post"),
    ("/v1/checks", "get"), ("/v1/checks/{id}", "get"), ("/v1/checks/{id}", "delete"),
    ("/v1/checks/{id}/request", "get"),
    ("/v1/models/{name}/comparisons", "post"),
    ("/v1/comparisons/{id}", "get"),
    ("/v1/comparisons/{id}", "delete"),
    ("/v1/models/{name}/scenarios", "get"),
    ("/v1/models/{name}/sample-models", "post"),
    ("/v1/sample-size", "get"),
    ("/v1/health", "get"), ("/v1/ready", "get"), ("/metrics", "get"),
    ("/v1/limits", "get"), ("/v1/openapi.json", "get"),
    ("/v1/checks/{id}/scenarios/{index}", "get"),
    ("/v1/checks/{id}/replay", "post"),
    ("/", "get"), ("/page/app.js", "get"), ("/page/app.css", "get"),
}
PUBLIC = {("/v1/health", "get"), ("/v1/ready", "get"), ("/metrics", "get"),
          ("/v1/openapi.json", "get"),
          ("/", "get"), ("/page/app.js", "get"), ("/page/app.css", "get")}
METHODS = {"get", "put", "post", "delete", "patch", "head", "options", "trace"}


def deref(doc, node):
    while isinstance(node, dict) and "$ref" in node:
        node = pointer_get(doc, node["$ref"][1:])
    return node


def test_schema_files():
    files = {}
    present = sorted(p.name for p in SCHEMAS.glob("*.schema.json"))
    check("schema files present", sorted(SCHEMA_FILES) == present,
          "expected %s, found %s" % (sorted(SCHEMA_FILES), present))
    for name in SCHEMA_FILES:
        path = SCHEMAS / name
        try:
            files[name] = load_json(path)
        except (OSError, ValueError) as e:
            check("%s parses" % name, False, str(e))
            continue
        schema = files[name]
        check("%s declares 2020-12" % name,
              schema.get("$schema") == "https://json-schema.org/draft/2020-12/schema")
        try:
            Draft202012Validator.check_schema(schema)
            check("%s is a valid schema" % name, True)
        except jsonschema.exceptions.SchemaError as e:
            check("%s is a valid schema" % name, False, e.message)
        check("%s has title and description" % name,
              isinstance(schema.get("title"), str) and isinstance(schema.get("description"), str))
        check("%s has no $id (references resolve against the file name)" % name,
              "$id" not in set(_keys(schema)))
    for name, schema in files.items():
        for where, ref in refs_in(schema):
            target, _, fragment = ref.partition("#")
            ok = True
            detail = ""
            try:
                doc = schema if target == "" else files[target]
                resolved = pointer_get(doc, fragment)
                ok = isinstance(resolved, (dict, bool))
            except (KeyError, IndexError, ValueError) as e:
                ok, detail = False, repr(e)
            check("%s%s $ref %s resolves" % (name, where, ref), ok, detail)
    return files


def _keys(node):
    if isinstance(node, dict):
        for k, v in node.items():
            yield k
            yield from _keys(v)
    elif isinstance(node, list):
        for v in node:
            yield from _keys(v)


def test_openapi(files):
    try:
        doc = load_json(SCHEMAS / "openapi.json")
        check("openapi.json parses", True)
    except (OSError, ValueError) as e:
        check("openapi.json parses", False, str(e))
        return None
    check("OpenAPI 3.1", str(doc.get("openapi", "")).startswith("3.1."))
    check("info title and version", isinstance(doc.get("info", {}).get("title"), str)
          and isinstance(doc.get("info", {}).get("version"), str))
    check("description documents the $ref approach",
          "components/schemas" in doc.get("info", {}).get("description", ""))
    check("dialect 2020-12",
          doc.get("jsonSchemaDialect") == "https://json-schema.org/draft/2020-12/schema")

    # Up to date with the schema files.
    spec = importlib.util.spec_from_file_location("build_openapi", SCHEMAS / "build_openapi.py")
    builder = importlib.util.module_from_spec(spec)
    spec.loader.exec_module(builder)
    check("openapi.json is up to date (schemas/build_openapi.py)", builder.build() == doc)
    for fname, cname in builder.COMPONENTS:
        check("component %s embeds %s" % (cname, fname),
              cname in doc.get("components", {}).get("schemas", {}))

    # Every reference is local and resolves.
    refs = list(refs_in(doc))
    check("openapi.json has references", len(refs) > 50)
    bad = []
    for where, ref in refs:
        if not ref.startswith("#"):
            bad.append("%s: %s (not local)" % (where, ref))
            continue
        try:
            pointer_get(doc, ref[1:])
        except (KeyError, IndexError, ValueError):
            bad.append("%s: %s" % (where, ref))
    check("every $ref in openapi.json resolves", not bad, "; ".join(bad[:5]))

    for cname, schema in doc.get("components", {}).get("schemas", {}).items():
        try:
            Draft202012Validator.check_schema(schema)
            check("component %s is a valid schema" % cname, True)
        except jsonschema.exceptions.SchemaError as e:
            check("component %s is a valid schema" % cname, False, e.message)

    # Paths and operations.
    paths = doc.get("paths", {})
    ops = {(p, m): o for p, item in paths.items() for m, o in item.items() if m in METHODS}
    missing = EXPECTED_OPERATIONS - set(ops)
    check("every API operation is described", not missing, str(sorted(missing)))
    extra = set(ops) - EXPECTED_OPERATIONS
    check("no undocumented operation", not extra, str(sorted(extra)))
    ids = [o.get("operationId") for o in ops.values()]
    check("operationIds present and unique", all(ids) and len(set(ids)) == len(ids))

    schemes = doc.get("components", {}).get("securitySchemes", {})
    bearer = [n for n, s in schemes.items() if s.get("type") == "http" and s.get("scheme") == "bearer"]
    check("bearer security scheme", len(bearer) == 1)
    check("bearer required by default", doc.get("security") == [{bearer[0]: []}] if bearer else False)

    for (path, method), o in sorted(ops.items()):
        label = "%s %s" % (method.upper(), path)
        public = o.get("security") == []
        check("%s public iff it needs no key" % label, public == ((path, method) in PUBLIC))
        if not public:
            check("%s answers 401 and 403" % label,
                  "401" in o.get("responses", {}) and "403" in o.get("responses", {}))
        # Path parameters declared.
        declared = {deref(doc, p).get("name") for p in paths[path].get("parameters", []) + o.get("parameters", [])
                    if deref(doc, p).get("in") == "path"}
        templated = {seg[1:-1] for seg in path.split("/") if seg.startswith("{")}
        check("%s declares its path parameters" % label, declared == templated,
              "%s vs %s" % (declared, templated))
        responses = o.get("responses", {})
        check("%s has a success response" % label, any(c.startswith("2") for c in responses))
        for code, r in responses.items():
            r = deref(doc, r)
            if code[0] in "45":
                content = r.get("content", {})
                ok = (list(content) == ["application/problem+json"] and
                      deref(doc, content["application/problem+json"].get("schema", {}))
                      is doc["components"]["schemas"].get("Problem"))
                check("%s %s is a problem document" % (label, code), ok)
            check("%s %s has a description" % (label, code), isinstance(r.get("description"), str))
        if "requestBody" in o:
            body = o["requestBody"]
            check("%s body is JSON" % label, list(body.get("content", {})) == ["application/json"])

    def body_schema(path, method):
        return deref(doc, ops[(path, method)]["requestBody"]["content"]["application/json"]["schema"])

    def answer_schema(path, method, code, media="application/json"):
        return deref(doc, deref(doc, ops[(path, method)]["responses"][code])["content"][media]["schema"])

    comp = doc["components"]["schemas"]
    pairs = [
        (body_schema("/v1/models", "post"), "Model", "POST /v1/models body"),
        (answer_schema("/v1/models", "post", "201"), "ModelRegistered", "POST /v1/models 201"),
        (answer_schema("/v1/models", "post", "200"), "ModelRegistered", "POST /v1/models 200"),
        (answer_schema("/v1/models", "get", "200"), "ModelList", "GET /v1/models"),
        (answer_schema("/v1/models/{name}", "get", "200"), "ModelVersion", "GET model"),
        (answer_schema("/v1/models/{name}/versions/{n}", "get", "200"), "ModelVersion", "GET version"),
        (body_schema("/v1/models/{name}/checks", "post"), "CheckRequest", "check body"),
        (body_schema("/v1/models/{name}/versions/{n}/checks", "post"), "CheckRequest", "version check body"),
        (answer_schema("/v1/models/{name}/checks", "post", "201"), "CheckResult", "check 201"),
        (answer_schema("/v1/models/{name}/checks", "post", "202"), "CheckResult", "check 202"),
        (answer_schema("/v1/checks/{id}", "get", "200"), "CheckResult", "GET check"),
        (answer_schema("/v1/checks", "get", "200"), "CheckList", "GET checks"),
        (body_schema("/v1/models/{name}/comparisons", "post"), "ComparisonRequest", "comparison body"),
        (answer_schema("/v1/models/{name}/comparisons", "post", "200"), "ComparisonResult", "comparison"),
        (answer_schema("/v1/models/{name}/scenarios", "get", "200"), "Scenarios", "scenarios"),
        (answer_schema("/v1/sample-size", "get", "200"), "SampleSize", "sample size"),
        (answer_schema("/v1/health", "get", "200"), "Health", "health"),
        (answer_schema("/v1/limits", "get", "200"), "Limits", "limits"),
    ]
    for got, cname, label in pairs:
        check("%s uses %s" % (label, cname), got is comp.get(cname))
    check("scenarios also as CSV",
          "text/csv" in deref(doc, ops[("/v1/models/{name}/scenarios", "get")]["responses"]["200"])["content"])
    check("metrics as text",
          any(m.startswith("text/plain") for m in
              deref(doc, ops[("/metrics", "get")]["responses"]["200"])["content"]))
    check("ready answers 503", "503" in ops[("/v1/ready", "get")]["responses"])
    check("503 carries Retry-After",
          "Retry-After" in deref(doc, {"$ref": "#/components/responses/Unavailable"}).get("headers", {}))
    check("DELETE model answers 204", "204" in ops[("/v1/models/{name}", "delete")]["responses"])
    q = {p["name"] for p in ops[("/v1/checks", "get")].get("parameters", [])}
    check("GET /v1/checks filters", {"model", "verdict", "since", "label", "limit", "after"} <= q)
    q = {p["name"] for p in ops[("/v1/models/{name}/scenarios", "get")].get("parameters", [])}
    check("GET scenarios parameters", {"count", "seed", "start", "stream"} <= q)
    q = {p["name"] for p in ops[("/v1/sample-size", "get")].get("parameters", [])}
    check("GET sample-size parameters",
          {"half_width", "confidence", "probability", "target", "power", "epsilon", "beta",
           "decisions", "discarded", "scenarios"} <= q)
    return doc


def test_samples(files, openapi):
    names = {}
    if openapi is not None:
        spec = importlib.util.spec_from_file_location("build_openapi", SCHEMAS / "build_openapi.py")
        builder = importlib.util.module_from_spec(spec)
        spec.loader.exec_module(builder)
        names.update(builder.FILE_TO_NAME)
    for fname, valid, invalid in SAMPLES:
        if fname not in files:
            check("%s available for samples" % fname, False)
            continue
        validators = [("file", make_validator(fname, files))]
        cname = names.get(fname)
        if openapi is not None and cname:
            validators.append(("openapi", make_validator(
                "openapi.json#/components/schemas/" + cname, {"openapi.json": openapi})))
        for how, v in validators:
            for label, doc in valid:
                errs = sorted(v.iter_errors(doc), key=lambda e: list(e.absolute_path))
                check("%s (%s) accepts %s" % (fname, how, label), not errs,
                      "; ".join("%s: %s" % ("/" + "/".join(map(str, e.absolute_path)), e.message[:160])
                                for e in errs[:3]))
            for label, doc in invalid:
                check("%s (%s) refuses %s" % (fname, how, label), not v.is_valid(doc))


def main():
    files = test_schema_files()
    openapi = test_openapi(files)
    test_samples(files, openapi)
    readme = SCHEMAS / "README.md"
    text = readme.read_text(encoding="utf-8") if readme.exists() else ""
    for name in SCHEMA_FILES + ["openapi.json", "build_openapi.py"]:
        check("README describes %s" % name, name in text)
    print("%d passed, %d failed" % (passed, failed))
    return 1 if failed else 0


if __name__ == "__main__":
    sys.exit(main())
