#!/usr/bin/python3
"""Build schemas/openapi.json from the schema files beside it.

openapi.json is self-contained: every schemas/*.schema.json is embedded under
components/schemas (without its "$schema" member) and every "$ref" is
rewritten to a local JSON Pointer into the OpenAPI document:

    "#/$defs/x"                  in foo.schema.json -> "#/components/schemas/Foo/$defs/x"
    "bar.schema.json"            -> "#/components/schemas/Bar"
    "bar.schema.json#/$defs/y"   -> "#/components/schemas/Bar/$defs/y"

so the document resolves offline with nothing but itself, including when the
daemon serves it at GET /v1/openapi.json. The schema files stay the source;
run this script after editing one:

    /usr/bin/python3 schemas/build_openapi.py          # rewrite openapi.json
    /usr/bin/python3 schemas/build_openapi.py --check  # exit 1 if out of date

tests/reference/test_schemas.py runs the check.
"""
import json
import os
import sys

HERE = os.path.dirname(os.path.abspath(__file__))

# Schema file -> component name, in the order they appear in the document.
COMPONENTS = [
    ("model.schema.json", "Model"),
    ("model-registered.schema.json", "ModelRegistered"),
    ("model-version.schema.json", "ModelVersion"),
    ("model-list.schema.json", "ModelList"),
    ("check-request.schema.json", "CheckRequest"),
    ("check-result.schema.json", "CheckResult"),
    ("check-list.schema.json", "CheckList"),
    ("comparison-request.schema.json", "ComparisonRequest"),
    ("comparison-result.schema.json", "ComparisonResult"),
    ("scenarios.schema.json", "Scenarios"),
    ("sample-model-request.schema.json", "SampleModelRequest"),
    ("sample-model.schema.json", "SampleModel"),
    ("explained-scenario.schema.json", "ExplainedScenario"),
    ("replay-result.schema.json", "ReplayResult"),
    ("sample-size.schema.json", "SampleSize"),
    ("health.schema.json", "Health"),
    ("limits.schema.json", "Limits"),
    ("problem.schema.json", "Problem"),
]
FILE_TO_NAME = dict(COMPONENTS)

DESCRIPTION = (
    "HTTP API of feasgate, version 1: register uncertainty models, check "
    "candidate decisions against their joint chance constraints, compare "
    "candidates on common random numbers, fetch design scenarios, plan sample "
    "sizes, and read the durable check log.\n\n"
    "Bodies are JSON (application/json; charset=utf-8); every 4xx and 5xx "
    "answer is an RFC 9457 problem document (application/problem+json). "
    "Members named here are the contract; members may be added to answers, "
    "so clients ignore unknown ones.\n\n"
    "Any route may answer 400 before routing for a request the daemon will "
    "not read: two Content-Length headers, Content-Length with "
    "Transfer-Encoding, or %00 (a NUL byte) in the path or the query. Any "
    "route may answer 503 with Retry-After and Connection: close on the "
    "first request of a connection opened beyond max_connections or "
    "max_connections_per_client (GET /v1/limits). Text a problem quotes "
    "from the request is valid UTF-8 (invalid bytes become U+FFFD). The "
    "scenarios body is streamed (chunked transfer coding).\n\n"
    "Schemas: this document is self-contained. Each JSON Schema (2020-12) "
    "file of the schemas/ folder is embedded verbatim under "
    "components/schemas (e.g. model.schema.json as Model, "
    "check-result.schema.json as CheckResult), with its references rewritten "
    "to local JSON Pointers (\"#/components/schemas/<Name>/$defs/...\"); no "
    "reference leaves the document, so a validator resolves everything "
    "offline. schemas/build_openapi.py regenerates the document from the "
    "files.\n\n"
    "Access: Authorization: Bearer <key>. Roles nest: reader (GET), checker "
    "(+ checks, comparisons, scenarios, sample models), author (+ register and retire "
    "models), admin (+ keys). x-feasgate-role names the least role of each "
    "operation. Missing or wrong key: 401; right key, wrong role: 403. "
    "/v1/health, /v1/ready, /metrics, /v1/openapi.json and the page (/, "
    "/page/app.js, /page/app.css) need no key."
)


def rewrite_ref(ref, own):
    target, _, fragment = ref.partition("#")
    name = own if target == "" else FILE_TO_NAME[target]
    return "#/components/schemas/" + name + fragment


def embed(node, own):
    if isinstance(node, dict):
        out = {}
        for k, v in node.items():
            if k == "$schema":
                continue
            if k == "$ref" and isinstance(v, str):
                out[k] = rewrite_ref(v, own)
            else:
                out[k] = embed(v, own)
        return out
    if isinstance(node, list):
        return [embed(v, own) for v in node]
    return node


def ref(name):
    return {"$ref": "#/components/schemas/" + name}


def json_body(name, description):
    return {"description": description,
            "content": {"application/json": {"schema": ref(name)}}}


def errors(*codes):
    return {str(c): {"$ref": "#/components/responses/" + ERROR_NAMES[c]}
            for c in codes}


ERROR_NAMES = {
    400: "BadRequest",
    401: "Unauthorized",
    403: "Forbidden",
    404: "NotFound",
    409: "Conflict",
    410: "Gone",
    413: "PayloadTooLarge",
    415: "UnsupportedMediaType",
    422: "Unprocessable",
    500: "InternalError",
    503: "Unavailable",
}

ERROR_TEXT = {
    400: "The request is invalid: malformed JSON (offset), a member that "
         "breaks the schema or the model's rules (errors, each with a JSON "
         "Pointer and, inside an expression, a column), or a limit exceeded "
         "(limit).",
    401: "Missing or wrong API key.",
    403: "The key's role does not allow this operation.",
    404: "No such model, version or check.",
    409: "expect_digest differs from the digest of the version checked.",
    410: "The model is retired: its versions and checks stay readable, but "
         "no new checks are accepted.",
    413: "The body exceeds the body-size limit (limit names it).",
    415: "The body is not application/json.",
    422: "Understood but not possible for this check or model (for "
         "example a scenario of a Latin hypercube or Sobol check, or a "
         "sample model of a row not affine in the decisions).",
    500: "An internal fault; nothing was half written.",
    503: "Overloaded (the work queue is full, or too many connections) or "
         "not ready; Retry-After says when to try again.",
}


def responses_components():
    out = {}
    for code, name in ERROR_NAMES.items():
        r = {"description": ERROR_TEXT[code],
             "content": {"application/problem+json": {"schema": ref("Problem")}}}
        if code == 503:
            r["headers"] = {"Retry-After": {"$ref": "#/components/headers/RetryAfter"}}
        out[name] = r
    return out


def path_param(name):
    return {"$ref": "#/components/parameters/" + name}


def query(name, schema, description):
    return {"name": name, "in": "query", "required": False,
            "description": description, "schema": schema}


def op(op_id, summary, role, responses, **extra):
    o = {"operationId": op_id, "summary": summary}
    o.update(extra)
    o["responses"] = responses
    if role is None:
        o["security"] = []
    else:
        o["x-feasgate-role"] = role
    return o


def check_post(op_id, summary):
    return op(
        op_id, summary, "checker",
        dict({
            "201": {"description": "The check finished within wait_s.",
                    "headers": {"Location": {"$ref": "#/components/headers/CheckLocation"}},
                    "content": {"application/json": {"schema": ref("CheckResult")}}},
            "202": {"description": "The check is still running after wait_s; "
                                   "poll its Location. status is running and "
                                   "progress is present.",
                    "headers": {"Location": {"$ref": "#/components/headers/CheckLocation"}},
                    "content": {"application/json": {"schema": ref("CheckResult")}}},
        }, **errors(400, 401, 403, 404, 409, 410, 413, 415, 500, 503)),
        description="Simulates the candidate on fresh scenarios of the "
                    "validation stream and judges its joint feasibility "
                    "against the target. The check is logged durably with "
                    "the key's name.",
        requestBody={"required": True,
                     "content": {"application/json": {"schema": ref("CheckRequest")}}},
    )


def paths():
    name_p = path_param("ModelName")
    version_p = path_param("Version")
    id_p = path_param("CheckId")
    cmp_p = path_param("ComparisonId")
    p = {}
    p["/v1/models"] = {
        "post": op(
            "registerModel", "Register a model document (a new version of its name)",
            "author",
            dict({
                "201": {"description": "A new version was registered.",
                        "headers": {"Location": {"$ref": "#/components/headers/ModelLocation"}},
                        "content": {"application/json": {"schema": ref("ModelRegistered")}}},
                "200": {"description": "An identical document (same digest) is "
                                       "already the latest version of that name.",
                        "headers": {"Location": {"$ref": "#/components/headers/ModelLocation"}},
                        "content": {"application/json": {"schema": ref("ModelRegistered")}}},
            }, **errors(400, 401, 403, 410, 413, 415, 500, 503)),
            requestBody={"required": True,
                         "content": {"application/json": {"schema": ref("Model")}}},
        ),
        "get": op(
            "listModels", "The latest version of each live model", "reader",
            dict({"200": json_body("ModelList", "The models.")},
                 **errors(401, 403, 500, 503)),
        ),
    }
    p["/v1/models/{name}"] = {
        "parameters": [name_p],
        "get": op(
            "getModel", "The latest version of a model, with its document", "reader",
            dict({"200": json_body("ModelVersion", "The latest version.")},
                 **errors(401, 403, 404, 500, 503)),
        ),
        "delete": op(
            "retireModel", "Retire a model", "author",
            dict({"204": {"description": "Retired: no new checks (410); its "
                                         "versions and checks stay readable."}},
                 **errors(401, 403, 404, 500, 503)),
        ),
    }
    p["/v1/models/{name}/versions/{n}"] = {
        "parameters": [name_p, version_p],
        "get": op(
            "getModelVersion", "One version of a model, with its document", "reader",
            dict({"200": json_body("ModelVersion", "That version.")},
                 **errors(401, 403, 404, 500, 503)),
        ),
    }
    p["/v1/models/{name}/checks"] = {
        "parameters": [name_p],
        "post": check_post("checkLatest", "Check a candidate against the latest version"),
    }
    p["/v1/models/{name}/versions/{n}/checks"] = {
        "parameters": [name_p, version_p],
        "post": check_post("checkVersion", "Check a candidate against one version"),
    }
    p["/v1/checks"] = {
        "get": op(
            "listChecks", "The check log, newest first", "reader",
            dict({"200": json_body("CheckList", "One page of check summaries.")},
                 **errors(400, 401, 403, 500, 503)),
            parameters=[
                query("model", {"type": "string", "pattern": "^[a-z0-9][a-z0-9_.-]{0,63}$"},
                      "Only checks of this model."),
                query("verdict", {"enum": ["pass", "fail", "inconclusive"]},
                      "Only checks with this verdict."),
                query("since", {"type": "string", "format": "date-time"},
                      "Only checks created at or after this RFC 3339 time."),
                query("label", {"type": "string"}, "Only checks with this label."),
                query("key", {"type": "string", "pattern": "^[A-Za-z0-9][A-Za-z0-9_.-]{0,63}$"},
                      "Only checks made with the API key of this name."),
                query("limit", {"type": "integer", "minimum": 1, "maximum": 1000, "default": 50},
                      "Summaries per page."),
                query("after", {"type": "string"},
                      "Cursor from the previous page's next."),
            ],
        ),
    }
    p["/v1/checks/{id}"] = {
        "parameters": [id_p],
        "get": op(
            "getCheck", "A check; while running also its progress", "reader",
            dict({"200": json_body("CheckResult", "The check.")},
                 **errors(401, 403, 404, 500, 503)),
        ),
        "delete": op(
            "cancelCheck", "Cancel a running check", "checker",
            dict({"200": json_body("CheckResult", "The check, now cancelled, with "
                                                  "the partial counts kept.")},
                 **errors(401, 403, 404, 409, 500, 503)),
            description="A check that has already ended is answered 409 and "
                        "left as it is.",
        ),
    }
    p["/v1/checks/{id}/scenarios/{index}"] = {
        "parameters": [id_p, {"name": "index", "in": "path", "required": True,
                              "schema": {"type": "integer", "minimum": 0},
                              "description": "Sample index, below the check's samples."}],
        "get": op(
            "explainScenario", "One scenario of a check, explained", "reader",
            dict({"200": json_body("ExplainedScenario",
                                   "The inputs drawn for that sample, the "
                                   "definitions and every row's excess, "
                                   "recomputed from the stored model version, "
                                   "request and seed.")},
                 **errors(400, 401, 403, 404, 422, 500, 503)),
            description="Indices of failing_scenarios give the scenarios that "
                        "failed. Latin hypercube and Sobol checks are answered "
                        "422: their samples are drawn replicate by replicate.",
        ),
    }
    p["/v1/checks/{id}/replay"] = {
        "parameters": [id_p],
        "post": op(
            "replayCheck", "Re-run a logged check and compare its counts", "checker",
            dict({"201": {"description": "The replay ended within the server's "
                                         "max_wait: reproduced says whether every "
                                         "count is identical, differences lists "
                                         "those that are not.",
                          "content": {"application/json": {"schema": ref("ReplayResult")}}},
                  "202": {"description": "The replay still runs (reproduced null); "
                                         "it is logged as a check with replay_of.",
                          "content": {"application/json": {"schema": ref("ReplayResult")}}}},
                 **errors(401, 403, 404, 409, 500, 503)),
            description="Runs the stored request (its seed included) on the stored "
                        "model version as a new check that carries replay_of. "
                        "A check still running, or ended without counts, is 409.",
        ),
    }
    p["/v1/checks/{id}/request"] = {
        "parameters": [id_p],
        "get": op(
            "getCheckRequest", "The request a check ran with", "reader",
            dict({"200": json_body("CheckRequest",
                                   "The recorded request in its normal form: every "
                                   "decision value, samples, seed, target, "
                                   "confidence, interval, stop_early, sampling and "
                                   "the optional members that were given.")},
                 **errors(401, 403, 404, 500, 503)),
            description="Send it again to POST /v1/models/{name}/checks to repeat "
                        "the check, or change it to try a neighbouring plan.",
        ),
    }
    p["/v1/models/{name}/comparisons"] = {
        "parameters": [name_p],
        "post": op(
            "compareCandidates", "Compare candidates on common random numbers", "checker",
            dict({"200": {"description": "Every candidate ended within wait_s: "
                                         "every candidate's check result and, when all "
                                         "are done, every pair's paired comparison.",
                          "headers": {"Location": {"$ref": "#/components/headers/ComparisonLocation"}},
                          "content": {"application/json": {"schema": ref("ComparisonResult")}}},
                  "202": {"description": "Still running after wait_s; poll its "
                                         "Location. status is running and progress "
                                         "is present.",
                          "headers": {"Location": {"$ref": "#/components/headers/ComparisonLocation"}},
                          "content": {"application/json": {"schema": ref("ComparisonResult")}}}},
                 **errors(400, 401, 403, 404, 409, 410, 413, 415, 500, 503)),
            description="Evaluates every candidate on the same scenarios; each "
                        "candidate is also logged as a check. The comparison "
                        "is kept: GET /v1/comparisons/{id} answers while it runs "
                        "and after it ends.",
            requestBody={"required": True,
                         "content": {"application/json": {"schema": ref("ComparisonRequest")}}},
        ),
    }
    p["/v1/comparisons/{id}"] = {
        "parameters": [cmp_p],
        "get": op(
            "getComparison", "A comparison; while running also its progress", "reader",
            dict({"200": json_body("ComparisonResult", "The comparison.")},
                 **errors(401, 403, 404, 500, 503)),
        ),
        "delete": op(
            "cancelComparison", "Cancel every candidate of a running comparison", "checker",
            dict({"200": json_body("ComparisonResult", "The comparison, now "
                                                       "cancelled, with each "
                                                       "candidate's partial "
                                                       "counts kept.")},
                 **errors(401, 403, 404, 409, 500, 503)),
            description="A comparison that has already ended is answered 409 "
                        "and left as it is.",
        ),
    }
    p["/v1/models/{name}/scenarios"] = {
        "parameters": [name_p],
        "get": op(
            "getScenarios", "Scenarios of the uncertain inputs", "checker",
            dict({"200": {"description": "The scenarios, as JSON or, with "
                                         "Accept: text/csv, as RFC 4180 CSV with a header row.",
                          "content": {
                              "application/json": {"schema": ref("Scenarios")},
                              "text/csv": {"schema": {"type": "string"}}}}},
                 **errors(400, 401, 403, 404, 500, 503)),
            description="Scenario i of a stream and seed is always the same, "
                        "alone or in bulk; the design and validation streams "
                        "never share a scenario for the same seed.",
            parameters=[
                query("count", {"type": "integer", "minimum": 1},
                      "Scenarios to return (capped; see GET /v1/limits)."),
                query("seed", {"type": "integer", "minimum": 0, "maximum": 9007199254740991},
                      "Seed of the stream."),
                query("start", {"type": "integer", "minimum": 0, "default": 0},
                      "Index of the first scenario."),
                query("stream", {"enum": ["design", "validation"], "default": "design"},
                      "design for building a sample model; validation to "
                      "inspect a check's failing scenario."),
            ],
        ),
    }
    p["/v1/models/{name}/sample-models"] = {
        "parameters": [name_p],
        "post": op(
            "createSampleModel", "The scenario program for a team's own solver",
            "checker",
            dict({"200": {"description": "The program as JSON with the MPS "
                                         "text and the column map or, with "
                                         "Accept: text/plain, the MPS text alone.",
                          "content": {
                              "application/json": {"schema": ref("SampleModel")},
                              "text/plain": {"schema": {"type": "string"}}}}},
                 **errors(400, 401, 403, 404, 410, 413, 415, 422, 500, 503)),
            description="Writes the deterministic program over the design "
                        "scenarios of the seed in free MPS: form indicator "
                        "(one binary per scenario, each row switched off "
                        "through the tightest big-M, the largest value of "
                        "the row over the decisions' bounds in that "
                        "scenario) or all (every scenario enforced, with the "
                        "Campi-Garatti violation level). 422: a row not "
                        "affine in the decisions (the row and its term "
                        "named), a decision whose missing bound leaves a "
                        "big-M infinite, or a model without decisions. Not "
                        "logged; nothing is stored.",
            requestBody={"required": True,
                         "content": {"application/json": {"schema": ref("SampleModelRequest")}}},
        ),
    }
    prob = {"type": "number", "exclusiveMinimum": 0, "exclusiveMaximum": 1}
    p["/v1/sample-size"] = {
        "get": op(
            "sampleSize", "Sample sizes (pure calculations)", "reader",
            dict({"200": json_body("SampleSize", "The inputs echoed with the answer and the method.")},
                 **errors(400, 401, 403, 500, 503)),
            description="Give one set of parameters: half_width and confidence "
                        "[and probability] for an interval of that half-width; "
                        "target, probability, confidence and power for the "
                        "samples to pass with that power; epsilon (or "
                        "scenarios), beta and decisions [and discarded] for "
                        "the scenario approach.",
            parameters=[
                query("half_width", prob, "Half-width of the interval wanted."),
                query("confidence", prob, "Two-sided confidence level."),
                query("probability", prob, "Assumed (or true) joint feasibility; worst case when absent."),
                query("target", prob, "Target joint feasibility."),
                query("power", prob, "Wanted probability of a pass."),
                query("epsilon", prob, "Violation level of the scenario approach."),
                query("beta", prob, "Confidence parameter of the scenario approach."),
                query("decisions", {"type": "integer", "minimum": 1},
                      "Decision variables of the convex design problem."),
                query("discarded", {"type": "integer", "minimum": 0, "default": 0},
                      "Scenarios discarded after the fact."),
                query("scenarios", {"type": "integer", "minimum": 1},
                      "Scenarios used; asks for the epsilon they guarantee."),
            ],
        ),
    }
    p["/v1/health"] = {
        "get": op("health", "Liveness", None,
                  {"200": json_body("Health", "The process serves.")}),
    }
    p["/v1/ready"] = {
        "get": op("ready", "Readiness", None,
                  {"200": json_body("Health", "The store answers and the work queue has room."),
                   "503": {"$ref": "#/components/responses/Unavailable"}}),
    }
    p["/metrics"] = {
        "get": op("metrics", "Prometheus metrics", None,
                  {"200": {"description": "Prometheus text exposition: requests by "
                                          "route and status, checks by verdict, samples "
                                          "simulated, check duration histogram, queue "
                                          "depth, workers busy.",
                           "content": {"text/plain; version=0.0.4": {"schema": {"type": "string"}}}}}),
    }
    p["/v1/limits"] = {
        "get": op("limits", "Every configured limit", "reader",
                  dict({"200": json_body("Limits", "The limits.")},
                       **errors(401, 403, 500, 503))),
    }
    page = "The page a person looks at (models, check history, one check, run, compare). "
    p["/"] = {
        "get": op("page", "The page", None,
                  {"200": {"description": page + "Static HTML; it loads only "
                           "/page/app.css and /page/app.js and calls only this API, "
                           "with the key typed into it. Served with a strict "
                           "Content-Security-Policy.",
                           "content": {"text/html": {"schema": {"type": "string"}}}}}),
    }
    p["/page/app.js"] = {
        "get": op("pageScript", "The page's script", None,
                  {"200": {"description": page + "Its script.",
                           "content": {"text/javascript": {"schema": {"type": "string"}}}}}),
    }
    p["/page/app.css"] = {
        "get": op("pageStyle", "The page's style sheet", None,
                  {"200": {"description": page + "Its style sheet.",
                           "content": {"text/css": {"schema": {"type": "string"}}}}}),
    }
    p["/v1/openapi.json"] = {
        "get": op("openapi", "This document", None,
                  {"200": {"description": "The OpenAPI 3.1 document.",
                           "content": {"application/json": {"schema": {"type": "object"}}}}}),
    }
    return p


def build():
    schemas = {}
    for fname, name in COMPONENTS:
        with open(os.path.join(HERE, fname), encoding="utf-8") as f:
            schemas[name] = embed(json.load(f), name)
    return {
        "openapi": "3.1.0",
        "info": {
            "title": "feasgate",
            "version": "1",
            "summary": "Judges candidate plans against joint chance constraints.",
            "description": DESCRIPTION,
        },
        "jsonSchemaDialect": "https://json-schema.org/draft/2020-12/schema",
        "security": [{"bearer": []}],
        "paths": paths(),
        "components": {
            "schemas": schemas,
            "responses": responses_components(),
            "parameters": {
                "ModelName": {"name": "name", "in": "path", "required": True,
                              "description": "Model name.",
                              "schema": {"type": "string",
                                         "pattern": "^[a-z0-9][a-z0-9_.-]{0,63}$"}},
                "Version": {"name": "n", "in": "path", "required": True,
                            "description": "Version number, from 1.",
                            "schema": {"type": "integer", "minimum": 1}},
                "ComparisonId": {"name": "id", "in": "path", "required": True,
                                 "description": "Comparison id.",
                                 "schema": {"type": "string", "pattern": "^cmp_[0-9A-Za-z]+$"}},
                "CheckId": {"name": "id", "in": "path", "required": True,
                            "description": "Check id.",
                            "schema": {"type": "string", "pattern": "^chk_[0-9A-Za-z]+$"}},
            },
            "headers": {
                "ModelLocation": {"description": "/v1/models/{name}/versions/{n} of the version.",
                                  "schema": {"type": "string"}},
                "CheckLocation": {"description": "/v1/checks/{id} of the check.",
                                  "schema": {"type": "string"}},
                "ComparisonLocation": {"description": "/v1/comparisons/{id} of the comparison.",
                                       "schema": {"type": "string"}},
                "RetryAfter": {"description": "Seconds to wait before trying again.",
                               "schema": {"type": "integer", "minimum": 0}},
            },
            "securitySchemes": {
                "bearer": {"type": "http", "scheme": "bearer",
                           "description": "An API key created with feasgate keys add."},
            },
        },
    }


def render(doc):
    return json.dumps(doc, indent=2, ensure_ascii=False) + "\n"


def main(argv):
    out = os.path.join(HERE, "openapi.json")
    text = render(build())
    if "--check" in argv:
        with open(out, encoding="utf-8") as f:
            if f.read() != text:
                print("schemas/openapi.json is out of date; run "
                      "/usr/bin/python3 schemas/build_openapi.py", file=sys.stderr)
                return 1
        return 0
    with open(out, "w", encoding="utf-8") as f:
        f.write(text)
    return 0


if __name__ == "__main__":
    sys.exit(main(sys.argv[1:]))
