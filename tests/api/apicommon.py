"""tests/api/apicommon.py -- what the API test scripts share.

- Daemon: one `feasgate serve` process on an ephemeral loopback port with
  the store it is given (binary from $FEASGATE_BIN, which ctest sets per
  build); the bound address is read from the first line of its standard
  error, which a thread keeps draining.
- Daemon.request() answers the parsed body, Daemon.fetch() the raw bytes;
  both check the answer against its schema when given `results`.
- Results: pass/fail counters and the "N passed, N failed" summary line.
- Schemas: every answer body checked against its schema in schemas/.
  Which schema applies is read from schemas/openapi.json (path template,
  method, status, content type -> component); the component is then
  validated against the schema *file* it was built from ("CheckResult" is
  check-result.schema.json), with the files loaded under their bare names
  so their references to each other resolve locally; nothing is fetched.
  Problem documents (application/problem+json) are checked against
  problem.schema.json whatever the route. Bodies with no JSON schema
  (metrics text, CSV scenarios, the OpenAPI document itself) are skipped.

Needs Debian's python3-jsonschema (through schemas/validator.py, which
handles 4.10's RefResolver and newer releases' `referencing` registry).
Run with /usr/bin/python3.
"""
import http.client
import json
import os
import re
import signal
import subprocess
import sys
import threading
import time
from pathlib import Path

ROOT = Path(__file__).resolve().parents[2]
SCHEMAS = ROOT / "schemas"
BIN = os.environ.get("FEASGATE_BIN", str(ROOT / "build" / "feasgate"))
START_TIMEOUT_S = 20
STOP_TIMEOUT_S = 60


class Results:
    def __init__(self):
        self.passed = 0
        self.failed = 0

    def check(self, cond, what):
        if cond:
            self.passed += 1
        else:
            self.failed += 1
            print("FAIL: " + what, flush=True)
        return cond

    def summary(self):
        print("%d passed, %d failed" % (self.passed, self.failed), flush=True)
        return 1 if self.failed else 0


# ---- schemas -------------------------------------------------------------

def _component_file(component):
    """"CheckResult" -> "check-result.schema.json" (build_openapi.py's
    naming, inverted)."""
    return re.sub(r"(?<!^)([A-Z])", r"-\1", component).lower() + ".schema.json"


sys.path.insert(0, str(SCHEMAS))
from validator import make_validator as _validator  # noqa: E402


class Schemas:
    """Answer schemas by (method, path, status, content type)."""

    def __init__(self):
        self.documents = {}
        for f in sorted(SCHEMAS.glob("*.schema.json")):
            with open(f, encoding="utf-8") as fh:
                self.documents[f.name] = json.load(fh)
        with open(SCHEMAS / "openapi.json", encoding="utf-8") as fh:
            self.openapi = json.load(fh)
        self.validators = {}
        self.routes = []  # (regex, template, operations)
        for template, ops in self.openapi.get("paths", {}).items():
            rx = "^" + re.sub(r"\\\{[^}]+\\\}", "[^/]+",
                              re.escape(template)) + "$"
            self.routes.append((re.compile(rx), template, ops))

    def validator(self, filename):
        if filename not in self.validators:
            self.validators[filename] = _validator(filename, self.documents)
        return self.validators[filename]

    def schema_for(self, method, path, status, ctype):
        """The schema file that applies, "" when none does (no JSON body
        is described), or None when the answer is not in the contract."""
        media = ctype.split(";")[0].strip().lower()
        if media == "application/problem+json":
            return "problem.schema.json"
        if media != "application/json":
            return ""
        path = path.split("?", 1)[0]
        for rx, template, ops in self.routes:
            if not rx.match(path):
                continue
            op = ops.get(method.lower()) or (
                ops.get("get") if method == "HEAD" else None)
            if op is None:
                return None
            responses = op.get("responses", {})
            r = (responses.get(str(status))
                 or responses.get("%dXX" % (status // 100))
                 or responses.get("default"))
            if r is None:
                return None
            content = r.get("content", {}).get("application/json")
            if content is None:
                return None
            ref = content.get("schema", {}).get("$ref", "")
            m = re.match(r"^#/components/schemas/([A-Za-z0-9]+)$", ref)
            return _component_file(m.group(1)) if m else ""
        return None

    def problems(self, method, path, status, headers, body):
        """A list of messages: empty when the answer matches its schema."""
        ctype = headers.get("content-type", "")
        name = self.schema_for(method, path, status, ctype)
        if name is None:
            return ["%s %s answered %s (%s), which schemas/openapi.json does "
                    "not describe" % (method, path, status, ctype or "no type")]
        if name == "" or method == "HEAD" or status == 204:
            return []
        if name not in self.documents:
            return ["no schema file %s" % name]
        if isinstance(body, (bytes, bytearray)):
            try:
                body = json.loads(body)
            except ValueError as e:
                return ["%s %s: %s body is not JSON: %s" % (method, path,
                                                            status, e)]
        errs = sorted(self.validator(name).iter_errors(body),
                      key=lambda e: list(e.absolute_path))
        return ["%s %s %s vs %s at /%s: %s" % (
            method, path, status, name,
            "/".join(str(x) for x in e.absolute_path), e.message[:300])
            for e in errs[:5]]


_schemas = None


def schemas():
    global _schemas
    if _schemas is None:
        _schemas = Schemas()
    return _schemas


# ---- the daemon ----------------------------------------------------------

class Endpoint:
    """An HTTP address that speaks feasgate's API: one daemon, or a load
    balancer in front of several. With `results`, every answer of
    request() and fetch() is checked against its schema."""

    def __init__(self, host, port, results=None):
        self.host, self.port, self.results = host, port, results

    def raw(self, method, path, data=None, headers=None, timeout=120):
        """(status, headers (lower-case names), raw bytes)."""
        conn = http.client.HTTPConnection(self.host, self.port,
                                          timeout=timeout)
        try:
            conn.request(method, path, body=data, headers=dict(headers or {}))
            resp = conn.getresponse()
            raw = resp.read()
            out = {k.lower(): v for k, v in resp.getheaders()}
            return resp.status, out, raw
        finally:
            conn.close()

    def _send(self, method, path, body, headers):
        """raw() with a dict or list body sent as JSON (application/json
        unless headers say otherwise) and a str body as UTF-8."""
        hdrs = dict(headers or {})
        data = body
        if isinstance(body, (dict, list)):
            data = json.dumps(body).encode()
            hdrs.setdefault("Content-Type", "application/json")
        elif isinstance(body, str):
            data = body.encode()
        return self.raw(method, path, data, hdrs)

    def fetch(self, method, path, body=None, headers=None):
        """(status, headers, raw bytes): request() for scripts that compare
        answers byte for byte; checked against its schema all the same."""
        status, out, raw = self._send(method, path, body, headers)
        if self.results is not None:
            self.check_schema(method, path, status, out, raw)
        return status, out, raw

    def request(self, method, path, body=None, headers=None):
        """(status, headers, parsed body or raw bytes); JSON bodies are
        sent as application/json unless headers say otherwise."""
        status, out, raw = self._send(method, path, body, headers)
        parsed = raw
        if raw and "json" in out.get("content-type", ""):
            try:
                parsed = json.loads(raw)
            except ValueError:
                parsed = raw
        if self.results is not None:
            self.check_schema(method, path, status, out, parsed)
        return status, out, parsed

    def check_schema(self, method, path, status, headers, body):
        msgs = schemas().problems(method, path, status, headers, body)
        self.results.check(not msgs, "; ".join(msgs))


class Daemon(Endpoint):
    """One `feasgate serve` process; stderr is drained by a thread. With
    `results`, every answer of request() is checked against its schema."""

    def __init__(self, store_url, *extra, env=None, results=None):
        args = [BIN, "serve", "--listen", "127.0.0.1:0", "--store", store_url,
                "--workers", "2"] + list(extra)
        self.results = results
        self.proc = subprocess.Popen(args, stdin=subprocess.DEVNULL,
                                     stdout=subprocess.DEVNULL,
                                     stderr=subprocess.PIPE, env=env)
        self.lines = []
        self.raw_lines = []  # the same as bytes, undecoded
        self.first = None
        ready = threading.Event()

        def drain():
            for raw in self.proc.stderr:
                self.raw_lines.append(raw)
                line = raw.decode("utf-8", "replace").rstrip("\n")
                self.lines.append(line)
                if self.first is None:
                    self.first = line
                    ready.set()
            ready.set()

        self.thread = threading.Thread(target=drain, daemon=True)
        self.thread.start()
        ready.wait(START_TIMEOUT_S)
        self.address = None
        try:
            self.address = json.loads(self.first or "")["address"]
        except (ValueError, KeyError, TypeError):
            pass
        if self.address:
            self.host, port = self.address.rsplit(":", 1)
            self.port = int(port)

    def alive(self):
        """True when the process runs and answers GET /v1/health."""
        if self.proc.poll() is not None:
            return False
        try:
            st, _, raw = self.raw("GET", "/v1/health", timeout=20)
            return st == 200 and json.loads(raw) == {"status": "ok"}
        except (OSError, ValueError, http.client.HTTPException):
            return False

    def stop(self):
        """SIGTERM; the exit status (None if it had to be killed)."""
        if self.proc.poll() is None:
            self.proc.send_signal(signal.SIGTERM)
        try:
            code = self.proc.wait(STOP_TIMEOUT_S)
        except subprocess.TimeoutExpired:
            self.proc.kill()
            self.proc.wait()
            code = None
        self.thread.join(5)
        return code


def is_problem(status, headers, body, code=None):
    """A problem document answered with `code` (any 4xx when None)."""
    ok_code = (400 <= status < 500) if code is None else status == code
    return (ok_code
            and headers.get("content-type", "").startswith(
                "application/problem+json")
            and isinstance(body, dict) and body.get("status") == status
            and all(k in body for k in ("type", "title", "detail")))


def wait_until(pred, seconds, step=0.2):
    """Polls pred() every `step` seconds for up to `seconds`; its last
    value."""
    end = time.time() + seconds
    while time.time() < end:
        if pred():
            return True
        time.sleep(step)
    return pred()


def psql(sql, db="postgres"):
    """Runs one statement on the PostgreSQL test server (FG_TEST_PG_HOST,
    _PORT, _USER: tests/pg/cluster.sh); its output, unaligned."""
    env = dict(os.environ, PGOPTIONS="-c client_min_messages=warning")
    out = subprocess.run(["psql", "-q", "-At", "-v", "ON_ERROR_STOP=1", "-h",
                          os.environ["FG_TEST_PG_HOST"], "-p",
                          os.environ["FG_TEST_PG_PORT"], "-U",
                          os.environ["FG_TEST_PG_USER"], "-d", db, "-c", sql],
                         check=True, env=env, capture_output=True, text=True)
    return out.stdout.strip()
