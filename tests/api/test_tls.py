#!/usr/bin/python3
"""tests/api/test_tls.py -- the daemon over HTTPS.

Makes a self-signed certificate for 127.0.0.1 / localhost at test time with
`openssl req -x509` (Debian package openssl), starts `feasgate serve
--tls-cert --tls-key` (apicommon.Daemon) and checks:
  - the "listening" line says tls true; Python's ssl module, trusting only
    that certificate, gets GET /v1/health, registers a model and runs a
    check (with a key: keys and TLS together);
  - a client trusting the system roots refuses the certificate, and plain
    HTTP on the TLS port gets no HTTP answer;
  - the remote gate reaches the daemon over https with --cacert and with
    its twin FEASGATE_CACERT, and fails (exit 3) without it;
  - FEASGATE_TLS_CERT / FEASGATE_TLS_KEY are the twins of the flags;
  - start-up refuses (exit 3, naming the flag) a certificate without a
    key, a key without a certificate, an unreadable file and a file with
    no PEM in it; a key that does not match the certificate stops start-up
    with a message.

Standard library only (plus the openssl program). Prints one line per
failed check and "N passed, N failed" as the last line; exits non-zero on
any failure.
"""
import http.client
import json
import os
import shutil
import ssl
import subprocess
import sys
import tempfile

from apicommon import BIN, Daemon, Results

R = Results()
check = R.check

MODEL = {
    "format": 1,
    "name": "tlsm",
    "title": "TLS test model",
    "decisions": [{"name": "x", "lower": -10, "upper": 10}],
    "uncertain": [{"name": "u", "distribution":
                   {"family": "normal", "mean": 0, "sd": 1}}],
    "constraints": [{"name": "cap", "require": "u <= x"}],
}


def make_cert(tmp, stem):
    cert = os.path.join(tmp, stem + ".crt")
    key = os.path.join(tmp, stem + ".key")
    p = subprocess.run(
        ["openssl", "req", "-x509", "-newkey", "rsa:2048", "-nodes",
         "-keyout", key, "-out", cert, "-days", "2", "-subj",
         "/CN=feasgate test", "-addext",
         "subjectAltName=IP:127.0.0.1,DNS:localhost"],
        capture_output=True, text=True, timeout=120)
    check(p.returncode == 0, "openssl req -x509: %s" % p.stderr[-300:])
    return cert, key


def https(d, ctx, method, path, body=None, headers=None):
    conn = http.client.HTTPSConnection(d.host, d.port, context=ctx,
                                       timeout=60)
    try:
        hdrs = dict(headers or {})
        data = None
        if body is not None:
            data = json.dumps(body).encode()
            hdrs["Content-Type"] = "application/json"
        conn.request(method, path, body=data, headers=hdrs)
        resp = conn.getresponse()
        raw = resp.read()
        return resp.status, json.loads(raw) if raw else None
    finally:
        conn.close()


def serve(*args):
    return subprocess.run([BIN, "serve"] + list(args), capture_output=True,
                          text=True, timeout=30)


def main():
    if not shutil.which("openssl"):
        print("FAIL: the openssl program is missing (Debian package openssl)")
        print("0 passed, 1 failed")
        return 1
    with tempfile.TemporaryDirectory() as tmp:
        cert, key = make_cert(tmp, "server")
        other_cert, other_key = make_cert(tmp, "other")
        store = "sqlite:" + os.path.join(tmp, "tls.db")
        p = subprocess.run([BIN, "keys", "add", "tls-admin", "--role",
                            "admin", "--store", store], capture_output=True,
                           text=True, timeout=60)
        api_key = p.stdout.strip().splitlines()[-1]
        auth = {"Authorization": "Bearer " + api_key}

        d = Daemon(store, "--tls-cert", cert, "--tls-key", key)
        first = {}
        try:
            first = json.loads(d.first or "{}")
        except ValueError:
            pass
        if not check(d.address is not None and first.get("tls") is True,
                     "the daemon starts with tls true: %r" % d.first):
            d.stop()
            return R.summary()
        try:
            ctx = ssl.create_default_context(cafile=cert)
            st, b = https(d, ctx, "GET", "/v1/health")
            check(st == 200 and b == {"status": "ok"},
                  "GET /v1/health over TLS: %d %r" % (st, b))
            st, b = https(d, ctx, "GET", "/v1/models")
            check(st == 401, "keys apply over TLS too: %d" % st)
            st, b = https(d, ctx, "POST", "/v1/models", MODEL, auth)
            check(st == 201 and b.get("name") == "tlsm",
                  "register over TLS: %d" % st)
            st, b = https(d, ctx, "POST", "/v1/models/tlsm/checks",
                          {"decision": {"x": 3}, "samples": 4096, "seed": 1,
                           "target": 0.9}, auth)
            check(st == 201 and b.get("verdict") == "pass"
                  and b.get("key") == "tls-admin",
                  "a check over TLS: %d %r" % (st, b and b.get("verdict")))

            try:
                https(d, ssl.create_default_context(), "GET", "/v1/health")
                check(False, "a client with the system roots must refuse "
                             "the self-signed certificate")
            except ssl.SSLCertVerificationError:
                check(True, "")
            other = ssl.create_default_context(cafile=other_cert)
            try:
                https(d, other, "GET", "/v1/health")
                check(False, "another certificate as anchor must not verify")
            except ssl.SSLCertVerificationError:
                check(True, "")
            plain_ok = False
            try:
                conn = http.client.HTTPConnection(d.host, d.port, timeout=10)
                conn.request("GET", "/v1/health")
                plain_ok = conn.getresponse().status == 200
                conn.close()
            except (OSError, http.client.HTTPException):
                pass
            check(not plain_ok, "plain HTTP on the TLS port gets no answer")

            req = os.path.join(tmp, "req.json")
            with open(req, "w") as f:
                json.dump({"decision": {"x": 3}, "samples": 2048}, f)
            url = "https://%s" % d.address
            env = dict(os.environ)
            env.pop("FEASGATE_CACERT", None)
            g = subprocess.run([BIN, "check", "--server", url, "--key",
                                api_key, "--cacert", cert, "tlsm", req],
                               capture_output=True, text=True, env=env,
                               timeout=120)
            check(g.returncode == 0 and '"pass"' in g.stdout,
                  "remote gate over https with --cacert: %d %s"
                  % (g.returncode, g.stderr))
            g = subprocess.run([BIN, "check", "--server", url, "--key",
                                api_key, "tlsm", req], capture_output=True,
                               text=True, env=dict(env, FEASGATE_CACERT=cert),
                               timeout=120)
            check(g.returncode == 0, "FEASGATE_CACERT is the twin: %d %s"
                  % (g.returncode, g.stderr))
            g = subprocess.run([BIN, "check", "--server", url, "--key",
                                api_key, "tlsm", req], capture_output=True,
                               text=True, env=env, timeout=120)
            check(g.returncode == 3 and g.stderr.strip(),
                  "without the anchor the gate fails (exit 3): %d"
                  % g.returncode)
        finally:
            check(d.stop() == 0, "clean stop")

        env = dict(os.environ, FEASGATE_TLS_CERT=cert, FEASGATE_TLS_KEY=key)
        d = Daemon(store, env=env)
        try:
            ok = json.loads(d.first or "{}").get("tls") is True
        except ValueError:
            ok = False
        check(ok, "FEASGATE_TLS_CERT/KEY are the twins: %r" % d.first)
        if ok:
            st, _ = https(d, ssl.create_default_context(cafile=cert), "GET",
                          "/v1/health")
            check(st == 200, "twin-configured TLS answers: %d" % st)
        d.stop()

        base = ["--listen", "127.0.0.1:0", "--store", store]
        p = serve(*base, "--tls-cert", cert)
        check(p.returncode == 3 and "--tls-key" in p.stderr,
              "--tls-cert alone: exit 3 naming --tls-key: %r" % p.stderr)
        p = serve(*base, "--tls-key", key)
        check(p.returncode == 3 and "--tls-cert" in p.stderr,
              "--tls-key alone: exit 3 naming --tls-cert: %r" % p.stderr)
        missing = os.path.join(tmp, "absent.pem")
        p = serve(*base, "--tls-cert", missing, "--tls-key", key)
        check(p.returncode == 3 and "absent.pem" in p.stderr,
              "unreadable certificate: exit 3 naming it: %r" % p.stderr)
        junk = os.path.join(tmp, "junk.pem")
        with open(junk, "w") as f:
            f.write("not a certificate\n")
        p = serve(*base, "--tls-cert", cert, "--tls-key", junk)
        check(p.returncode == 3 and "PEM" in p.stderr,
              "a key file without PEM: exit 3: %r" % p.stderr)
        p = serve(*base, "--tls-cert", cert, "--tls-key", other_key)
        check(p.returncode != 0 and "tls" in p.stderr.lower(),
              "a key of another certificate stops start-up: %d %r"
              % (p.returncode, p.stderr[-300:]))
    return R.summary()


if __name__ == "__main__":
    sys.exit(main())
