#!/usr/bin/python3
"""tests/api/test_auth.py -- API keys and roles, end to end.

Starts `feasgate serve` (apicommon.Daemon) on a temporary SQLite store whose
keys are made with `feasgate keys add`, and checks:
  - the keys command: the new key alone on the last line of stdout, its
    form (fgk_ + 43 base64url characters), `list` naming keys without ever
    showing a key, `revoke`, FEASGATE_STORE as the twin of --store, names
    never reused, bad roles and names refused (exit 3), only a salted
    hash in the store file (SHA-256(salt || key), recomputed with
    hashlib), and an old (schema 1) store file migrated;
  - the role matrix: every route with every role (the routes and their
    least roles checked against the x-feasgate-role of every operation in
    schemas/openapi.json) -- an allowed role gets
    its route's ordinary answer (2xx, or a 4xx other than 401/403), a
    lower role 403 -- and the open routes without any key;
  - 401 with WWW-Authenticate: Bearer for a missing, malformed, wrong or
    revoked key, also on unknown paths; a key added while the daemon runs
    takes effect, a revoked one stops working, each within a couple of
    seconds;
  - every check records its key's name (result body, list summary, store
    column, request log);
  - a non-loopback listener (0.0.0.0) refused (exit 3) on a store without
    keys, accepted with --allow-keyless, accepted with a key -- and then still
    closed after that key is revoked.

Standard library (plus apicommon's jsonschema checks of every answer).
Prints one line per failed check and "N passed, N failed" as the last line;
exits non-zero on any failure.
"""
import hashlib
import json
import os
import re
import sqlite3
import subprocess
import sys
import tempfile
import time

from apicommon import BIN, ROOT, Daemon, Results, is_problem

R = Results()
check = R.check

KEY_RE = re.compile(r"^fgk_[A-Za-z0-9_-]{43}$")
# Keys added or revoked while the daemon runs take effect within a second
# (its cache); this much is allowed before a test gives up.
PROPAGATION_S = 3.0
ROLES = ["reader", "checker", "author", "admin"]


def keys_cli(*args, env=None):
    p = subprocess.run([BIN, "keys"] + list(args), capture_output=True,
                       text=True, env=env, timeout=60)
    return p.returncode, p.stdout, p.stderr


def add_key(store, name, role):
    rc, out, err = keys_cli("add", name, "--role", role, "--store", store)
    check(rc == 0, "keys add %s: exit %d (%s)" % (name, rc, err.strip()))
    lines = out.strip().splitlines()
    return lines[-1] if lines else ""


def model_doc(name):
    return {
        "format": 1,
        "name": name,
        "title": "auth test model",
        "decisions": [{"name": "x", "lower": -10, "upper": 10}],
        "uncertain": [{"name": "u", "distribution":
                       {"family": "normal", "mean": 0, "sd": 1}}],
        "constraints": [{"name": "cap", "require": "u <= x"}],
    }


def bearer(key):
    return {"Authorization": "Bearer " + key}


def test_cli(tmp):
    store = "sqlite:" + os.path.join(tmp, "cli.db")
    rc, out, err = keys_cli("add", "pipeline", "--role", "checker",
                            "--store", store)
    check(rc == 0, "keys add: exit 0, got %d (%s)" % (rc, err))
    key = out.strip().splitlines()[-1] if out.strip() else ""
    check(KEY_RE.match(key) is not None,
          "the last line of keys add is the key alone, got %r" % key)
    env = dict(os.environ, FEASGATE_STORE=store)
    key2 = out2 = None
    rc, out2, err = keys_cli("add", "dash", "--role", "reader", env=env)
    check(rc == 0, "keys add with FEASGATE_STORE: exit 0 (%s)" % err)
    key2 = out2.strip().splitlines()[-1] if out2.strip() else ""
    check(KEY_RE.match(key2) and key2 != key, "a second, different key")
    rc, out, err = keys_cli("list", env=env)
    check(rc == 0 and "pipeline" in out and "dash" in out
          and "checker" in out and "reader" in out,
          "keys list names both keys and roles: %r" % out)
    check(key not in out and key2 not in out and "fgk_" not in out,
          "keys list never shows a key")
    rc, _, err = keys_cli("add", "pipeline", "--role", "admin", "--store",
                          store)
    check(rc == 3 and "exists" in err, "a name is not reused: %d %r" % (rc, err))
    rc, _, err = keys_cli("add", "x", "--role", "owner", "--store", store)
    check(rc == 3 and "--role" in err, "an unknown role is refused: %r" % err)
    rc, _, err = keys_cli("add", "bad name", "--role", "reader", "--store",
                          store)
    check(rc == 3, "an invalid name is refused: %r" % err)
    rc, _, err = keys_cli("add", "norole", "--store", store)
    check(rc == 3 and "--role" in err, "add without --role is refused")
    saved = dict(os.environ)
    saved.pop("FEASGATE_STORE", None)
    rc, _, err = keys_cli("list", env=saved)
    check(rc == 3 and "store" in err, "no store at all: exit 3 (%r)" % err)
    rc, out, err = keys_cli("revoke", "dash", "--store", store)
    check(rc == 0, "keys revoke: exit 0 (%s)" % err)
    rc, _, err = keys_cli("revoke", "dash", "--store", store)
    check(rc == 3 and "already" in err, "revoking twice: exit 3 (%r)" % err)
    rc, _, err = keys_cli("revoke", "nobody", "--store", store)
    check(rc == 3 and "nobody" in err, "revoking an unknown key: exit 3")
    rc, out, _ = keys_cli("list", "--store", store)
    row = [l for l in out.splitlines() if l.startswith("dash")]
    check(row and re.search(r"\d{4}-\d\d-\d\dT\d\d:\d\d:\d\dZ\s*$", row[0])
          and not row[0].rstrip().endswith("-"),
          "the revoked key shows its revocation time: %r" % row)
    path = store[len("sqlite:"):]
    with open(path, "rb") as f:
        data = f.read()
    check(key.encode() not in data and key[4:].encode() not in data,
          "the key itself is not in the store file")
    db = sqlite3.connect(path)
    rows = db.execute("SELECT name, role, length(salt), length(hash),"
                      " revoked_at FROM keys ORDER BY name").fetchall()
    ver = db.execute("SELECT version FROM schema_version").fetchall()
    db.close()
    check(rows == [("dash", "reader", 16, 32, rows[0][4]),
                   ("pipeline", "checker", 16, 32, "")]
          and rows[0][4] != "", "keys table rows: %r" % rows)
    check(ver == [(2,)], "schema_version is 2: %r" % ver)
    db = sqlite3.connect(path)
    salt, digest = db.execute("SELECT salt, hash FROM keys WHERE name ="
                              " 'pipeline'").fetchone()
    db.close()
    check(hashlib.sha256(salt + key.encode()).digest() == digest,
          "the stored hash is SHA-256(salt || key) (hashlib)")

    # An old file (schema 1, no keys table) is migrated on open.
    old = os.path.join(tmp, "old.db")
    db = sqlite3.connect(old)
    db.execute("CREATE TABLE schema_version (version INTEGER NOT NULL)")
    db.execute("INSERT INTO schema_version VALUES (1)")
    db.commit()
    db.close()
    rc, out, err = keys_cli("add", "late", "--role", "admin", "--store",
                            "sqlite:" + old)
    check(rc == 0, "keys add on a schema-1 file: exit 0 (%s)" % err)
    db = sqlite3.connect(old)
    ver = db.execute("SELECT version FROM schema_version").fetchall()
    n = db.execute("SELECT count(*) FROM keys").fetchone()[0]
    db.close()
    check(ver == [(2,)] and n == 1, "schema 1 migrated to 2: %r %d" % (ver, n))


def wait_for(pred, seconds=PROPAGATION_S):
    end = time.monotonic() + seconds
    while True:
        if pred():
            return True
        if time.monotonic() > end:
            return False
        time.sleep(0.1)


def is_401(st, h, b):
    return (is_problem(st, h, b, 401)
            and h.get("www-authenticate", "").startswith("Bearer"))


def test_matrix(d, store, keys):
    admin = bearer(keys["admin"])
    name = "authm"
    st, _, _ = d.request("POST", "/v1/models", model_doc(name), admin)
    check(st == 201, "admin registers the model: %d" % st)
    st, _, b = d.request("POST", "/v1/models/%s/checks" % name,
                         {"decision": {"x": 1}, "samples": 2000, "seed": 1},
                         admin)
    check(st == 201, "admin runs a check: %d" % st)
    ended = b.get("id", "") if isinstance(b, dict) else ""
    small = {"decision": {"x": 1}, "samples": 1000, "seed": 2}
    pair = {"candidates": [{"label": "a", "decision": {"x": 1}},
                           {"label": "b", "decision": {"x": 2}}],
            "samples": 1024, "seed": 3}
    st, _, b = d.request("POST", "/v1/models/%s/comparisons" % name, pair,
                         admin)
    check(st == 200, "admin runs a comparison: %d" % st)
    cmp_ended = b.get("id", "") if isinstance(b, dict) else ""

    # (method, path, body, least role); "{retire}" is re-registered first.
    routes = [
        ("GET", "/v1/models", None, "reader"),
        ("GET", "/v1/models/%s" % name, None, "reader"),
        ("GET", "/v1/models/%s/versions/1" % name, None, "reader"),
        ("GET", "/v1/checks", None, "reader"),
        ("GET", "/v1/checks/%s" % ended, None, "reader"),
        ("GET", "/v1/checks/%s/request" % ended, None, "reader"),
        ("GET", "/v1/limits", None, "reader"),
        ("GET", "/v1/sample-size?half_width=0.01&confidence=0.95", None,
         "reader"),
        ("GET", "/v1/models/%s/scenarios?count=2&seed=1" % name, None,
         "checker"),
        ("POST", "/v1/models/%s/sample-models" % name, {"scenarios": 3, "form": "all"},
         "checker"),
        ("POST", "/v1/models/%s/checks" % name, small, "checker"),
        ("POST", "/v1/models/%s/versions/1/checks" % name, small, "checker"),
        ("POST", "/v1/models/%s/comparisons" % name, pair, "checker"),
        ("DELETE", "/v1/checks/%s" % ended, None, "checker"),
        ("GET", "/v1/comparisons/%s" % cmp_ended, None, "reader"),
        ("GET", "/v1/checks/%s/scenarios/0" % ended, None, "reader"),
        ("POST", "/v1/checks/%s/replay" % ended, {}, "checker"),
        ("DELETE", "/v1/comparisons/%s" % cmp_ended, None, "checker"),
        ("POST", "/v1/models", model_doc(name), "author"),
        ("DELETE", "/v1/models/retire-me", None, "author"),
    ]
    # The matrix covers every operation of the OpenAPI document, with the
    # least role its x-feasgate-role names.
    with open(os.path.join(ROOT, "schemas", "openapi.json")) as f:
        spec = json.load(f)
    subs = {"{name}": name, "{n}": "1", "{id}": ended, "{index}": "0"}
    documented = {}
    for template, ops in spec["paths"].items():
        concrete = template
        if template.startswith("/v1/comparisons/"):
            concrete = template.replace("{id}", cmp_ended)
        for k, v in subs.items():
            concrete = concrete.replace(k, v)
        for m, op in ops.items():
            if isinstance(op, dict) and "operationId" in op:
                documented[(m.upper(), concrete)] = op.get("x-feasgate-role")
    covered = {(m, p.split("?")[0].replace("retire-me", name)): least
               for m, p, _, least in routes}
    for (m, p), role in sorted(documented.items()):
        if role is None:
            continue  # open routes, checked below
        check(covered.get((m, p)) == role,
              "%s %s: the matrix says %s, the OpenAPI document %s"
              % (m, p, covered.get((m, p)), role))
    for method, path, body, least in routes:
        for role in ROLES:
            if path.endswith("retire-me"):
                d.request("POST", "/v1/models", model_doc("retire-me"), admin)
            st, h, b = d.request(method, path, body, bearer(keys[role]))
            allowed = ROLES.index(role) >= ROLES.index(least)
            what = "%s %s as %s (least %s): %d" % (method, path, role, least,
                                                   st)
            if allowed:
                check(200 <= st < 500 and st not in (401, 403), what)
            else:
                check(is_problem(st, h, b, 403)
                      and "role" in b.get("detail", ""), what + " is a 403")
        st, h, b = d.request(method, path, body)
        check(is_401(st, h, b), "%s %s without a key: %d" % (method, path, st))
    # The one ended check cannot be cancelled: 409 (allowed, not 401/403).
    st, h, b = d.request("DELETE", "/v1/checks/%s" % ended, None,
                         bearer(keys["checker"]))
    check(is_problem(st, h, b, 409), "DELETE of an ended check: 409 (%d)" % st)

    for path in ("/v1/health", "/v1/ready", "/metrics", "/v1/openapi.json"):
        st, _, _ = d.request("GET", path)
        check(st == 200, "open route %s without a key: %d" % (path, st))
        st, _, _ = d.request("GET", path, headers={"Authorization": "junk"})
        check(st == 200, "open route %s with a junk header: %d" % (path, st))

    st, h, b = d.request("GET", "/v1/no/such/path")
    check(is_401(st, h, b), "unknown path without a key: 401 (%d)" % st)
    st, h, b = d.request("GET", "/v1/no/such/path", None, admin)
    check(is_problem(st, h, b, 404), "unknown path with a key: 404 (%d)" % st)
    st, h, b = d.request("PUT", "/v1/models", "{}", bearer(keys["reader"]))
    check(is_problem(st, h, b, 405), "wrong method with a key: 405 (%d)" % st)

    # Missing, malformed, wrong keys.
    bad_headers = [
        ("malformed: Basic", {"Authorization": "Basic dXNlcjpwYXNz"}),
        ("malformed: no token", {"Authorization": "Bearer"}),
        ("malformed: two tokens", {"Authorization": "Bearer a b"}),
        ("malformed: too long", {"Authorization": "Bearer " + "k" * 300}),
        ("malformed: bad characters", {"Authorization": "Bearer fgk_<>"}),
        ("wrong key", bearer("fgk_" + "A" * 43)),
        ("wrong key: one character changed",
         bearer(keys["admin"][:-1] + ("B" if keys["admin"][-1] != "B"
                                      else "C"))),
    ]
    for what, hdrs in bad_headers:
        st, h, b = d.request("GET", "/v1/models", None, hdrs)
        check(is_401(st, h, b), "%s: 401 (%d)" % (what, st))
    st, h, b = d.request("GET", "/v1/models", None,
                         {"Authorization": "bearer " + keys["reader"]})
    check(st == 200, "the scheme name is case-insensitive: %d" % st)
    # A body sent without a key is refused, not read.
    st, h, b = d.request("POST", "/v1/models", model_doc("nokey"))
    check(is_401(st, h, b), "POST without a key: 401 (%d)" % st)
    st, _, _ = d.request("GET", "/v1/models/nokey", None, admin)
    check(st == 404, "... and registered nothing: %d" % st)

    # Added while running: takes effect; revoked: stops.
    late = add_key(store, "late-reader", "reader")
    ok = wait_for(lambda: d.request("GET", "/v1/models", None,
                                    bearer(late))[0] == 200)
    check(ok, "a key added while the daemon runs is accepted within %gs"
          % PROPAGATION_S)
    rc, _, err = keys_cli("revoke", "late-reader", "--store", store)
    check(rc == 0, "revoke late-reader: %s" % err)
    ok = wait_for(lambda: is_401(*d.request("GET", "/v1/models", None,
                                            bearer(late))))
    check(ok, "a revoked key is refused (401) within %gs" % PROPAGATION_S)


def test_key_names(d, store, keys):
    name = "authm"
    st, _, b = d.request("POST", "/v1/models/%s/checks" % name,
                         {"decision": {"x": 2}, "samples": 4096, "seed": 5,
                          "label": "keyed"}, bearer(keys["checker"]))
    check(st == 201 and b.get("key") == "ci-checker",
          "the result body names the key: %r" % (b.get("key")
                                                 if isinstance(b, dict)
                                                 else b))
    cid = b.get("id", "")
    st, _, b = d.request("GET", "/v1/checks/%s" % cid, None,
                         bearer(keys["reader"]))
    check(st == 200 and b.get("key") == "ci-checker",
          "GET of the check names the key")
    st, _, b = d.request("GET", "/v1/checks?label=keyed", None,
                         bearer(keys["reader"]))
    summ = b.get("checks", []) if isinstance(b, dict) else []
    check(len(summ) == 1 and summ[0].get("key") == "ci-checker",
          "the list summary names the key: %r" % summ)
    db = sqlite3.connect(store[len("sqlite:"):])
    row = db.execute("SELECT key FROM checks WHERE id = ?", (cid,)).fetchone()
    db.close()
    check(row == ("ci-checker",), "the store's key column: %r" % (row,))
    # Asynchronous (202) checks carry it too.
    st, _, b = d.request("POST", "/v1/models/%s/checks" % name,
                         {"decision": {"x": 2}, "samples": 20000000,
                          "seed": 6, "wait_s": 0}, bearer(keys["author"]))
    check(st in (201, 202) and b.get("key") == "ci-author",
          "a 202 body names the key: %d %r" % (st, b.get("key")))
    aid = b.get("id", "")
    done = wait_for(lambda: d.request("GET", "/v1/checks/%s" % aid, None,
                                      bearer(keys["reader"]))[2]
                    .get("status") != "running", 120)
    st, _, b = d.request("GET", "/v1/checks/%s" % aid, None,
                         bearer(keys["reader"]))
    check(done and b.get("key") == "ci-author",
          "the recorded async check names its key")
    # The log filtered by key: each key's checks only, and a bad name is a 400.
    st, _, b = d.request("GET", "/v1/checks?limit=1000", None,
                         bearer(keys["reader"]))
    every = b.get("checks", []) if isinstance(b, dict) else []
    for kname, want in (("ci-checker", cid), ("ci-author", aid)):
        st, _, b = d.request("GET", "/v1/checks?key=%s&limit=1000" % kname,
                             None, bearer(keys["reader"]))
        got = [c.get("id") for c in (b.get("checks", [])
                                     if isinstance(b, dict) else [])]
        expect = [c.get("id") for c in every if c.get("key") == kname]
        check(st == 200 and got == expect and want in got,
              "?key=%s lists exactly that key's checks, newest first "
              "(%d of %d)" % (kname, len(got), len(every)))
    st, _, b = d.request("GET", "/v1/checks?key=nobody", None,
                         bearer(keys["reader"]))
    check(st == 200 and b.get("checks") == [], "?key= of no check: an empty page")
    st, h, b = d.request("GET", "/v1/checks?key=bad%20name", None,
                         bearer(keys["reader"]))
    check(is_problem(st, h, b, 400) and "key" in b.get("detail", ""),
          "?key= with a name no key can have: 400 naming it: %r"
          % (b.get("detail") if isinstance(b, dict) else b))
    time.sleep(0.2)
    logged = [json.loads(l) for l in d.lines if '"event":"request"' in l]
    check(any(e.get("key") == "ci-checker" and e.get("method") == "POST"
              for e in logged), "the request log names the key")
    check(any(e.get("key") is None and e.get("status") == 401
              for e in logged), "the request log says key null on a 401")


def run_serve(*args, timeout=20):
    return subprocess.run([BIN, "serve"] + list(args), capture_output=True,
                          text=True, timeout=timeout)


def test_listen(tmp):
    store = "sqlite:" + os.path.join(tmp, "listen.db")
    p = run_serve("--listen", "0.0.0.0:0", "--store", store, "--workers", "1")
    check(p.returncode == 3 and "loopback" in p.stderr
          and "--allow-keyless" in p.stderr,
          "0.0.0.0 without keys is refused with exit 3: %d %r"
          % (p.returncode, p.stderr[-300:]))
    d = Daemon(store, "--listen", "0.0.0.0:0", "--allow-keyless", results=R)
    check(d.address is not None and d.alive(),
          "0.0.0.0 with --allow-keyless starts")
    if d.address:
        st, _, _ = d.request("GET", "/v1/models")
        check(st == 200, "--allow-keyless without keys: open (%d)" % st)
    d.stop()
    env = dict(os.environ, FEASGATE_ALLOW_KEYLESS="1")
    d = Daemon(store, "--listen", "0.0.0.0:0", env=env, results=R)
    check(d.address is not None, "FEASGATE_ALLOW_KEYLESS=1 is the twin")
    d.stop()
    key = add_key(store, "ops", "admin")
    d = Daemon(store, "--listen", "0.0.0.0:0", results=R)
    check(d.address is not None, "0.0.0.0 with a live key starts")
    if d.address:
        st, h, b = d.request("GET", "/v1/models")
        check(is_401(st, h, b), "... and needs keys (%d)" % st)
        st, _, _ = d.request("GET", "/v1/models", None, bearer(key))
        check(st == 200, "... and takes the key (%d)" % st)
        keys_cli("revoke", "ops", "--store", store)
        ok = wait_for(lambda: is_401(*d.request("GET", "/v1/models", None,
                                                bearer(key))))
        check(ok, "revoked key refused")
        st, h, b = d.request("GET", "/v1/models")
        check(is_401(st, h, b),
              "no live key left on 0.0.0.0: still closed, not open (%d)" % st)
        st, _, _ = d.request("GET", "/v1/health")
        check(st == 200, "... while health stays open")
    check(d.stop() == 0, "clean stop")
    # Loopback with no keys stays open, as before keys existed.
    d = Daemon("sqlite:" + os.path.join(tmp, "open.db"), results=R)
    st, _, _ = d.request("GET", "/v1/models")
    check(st == 200, "loopback without keys: open (%d)" % st)
    d.stop()


def main():
    with tempfile.TemporaryDirectory() as tmp:
        test_cli(tmp)
        store = "sqlite:" + os.path.join(tmp, "auth.db")
        keys = {role: add_key(store, "ci-" + role, role) for role in ROLES}
        d = Daemon(store, results=R)
        if not check(d.address is not None, "the daemon starts: %r" % d.first):
            d.stop()
            return R.summary()
        try:
            test_matrix(d, store, keys)
            test_key_names(d, store, keys)
        finally:
            check(d.stop() == 0, "clean stop")
        test_listen(tmp)
    return R.summary()


if __name__ == "__main__":
    sys.exit(main())
