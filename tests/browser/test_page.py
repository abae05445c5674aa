"""tests/browser/test_page.py -- the page at GET /, driven in a real browser.

Starts Debian's `chromium` headless (--headless=new, a temporary profile,
--remote-debugging-port=0 with the port read from DevToolsActivePort) and
drives it through the DevTools protocol directly with Debian's
python3-websocket (websocket-client); nothing is downloaded. Against a
daemon (apicommon.Daemon) with the demo models and two demo checks:

- GET / answers text/html with a Content-Security-Policy that allows
  scripts, styles and requests only from the daemon;
- the models and checks appear; a check's view shows its verdict as a
  word, the joint interval and its rows;
- the run form submits a check and shows its result;
- a running check (large samples, wait_s 0) shows a progress bar and is
  cancelled from the page;
- with keys in the store the page asks for a key, and with a reader key
  the run form's submit shows the API's 403 as a sentence;
- every request the browser makes (CDP Network.requestWillBeSent) goes
  to the daemon's own address;
- screenshots at 1280x800 and 390 wide go to build/page-shots/ (or
  $FG_PAGE_SHOTS) for a person to look at.

Exit 77 (skipped) only when chromium is not installed.
Run with /usr/bin/python3.
"""
import base64
import json
import os
import shutil
import subprocess
import sys
import tempfile
import time
from pathlib import Path

sys.path.insert(0, str(Path(__file__).resolve().parents[1] / "api"))
from apicommon import BIN, ROOT, Daemon, Results  # noqa: E402

CHROMIUM = shutil.which("chromium") or shutil.which("chromium-browser")
if not CHROMIUM:
    print("chromium is not installed: skipped")
    sys.exit(77)
import websocket  # noqa: E402  (python3-websocket; installed with chromium)

SHOTS = Path(os.environ.get("FG_PAGE_SHOTS", ROOT / "build" / "page-shots"))
DEMO = ROOT / "deploy" / "demo"
WAIT_S = 20  # longest wait for one thing to appear on the page

res = Results()
check = res.check


class Browser:
    """One headless chromium and one page target, spoken to over CDP."""

    def __init__(self):
        self.profile = tempfile.mkdtemp(prefix="fg-page-")
        self.proc = subprocess.Popen(
            [CHROMIUM, "--headless=new", "--no-sandbox", "--disable-gpu",
             "--no-first-run", "--no-default-browser-check",
             "--disable-extensions", "--disable-background-networking",
             "--disable-component-update", "--disable-sync",
             "--user-data-dir=" + self.profile,
             "--remote-debugging-port=0", "--window-size=1280,800",
             "about:blank"],
            stdin=subprocess.DEVNULL, stdout=subprocess.DEVNULL,
            stderr=subprocess.DEVNULL)
        port_file = Path(self.profile) / "DevToolsActivePort"
        deadline = time.time() + 30
        while time.time() < deadline and not (
                port_file.exists() and port_file.read_text().strip()):
            time.sleep(0.1)
        port = int(port_file.read_text().split()[0])
        import urllib.request
        with urllib.request.urlopen("http://127.0.0.1:%d/json/list" % port,
                                    timeout=10) as f:
            targets = json.load(f)
        page = [t for t in targets if t.get("type") == "page"][0]
        self.ws = websocket.create_connection(page["webSocketDebuggerUrl"],
                                              timeout=30,
                                              suppress_origin=True)
        self.next_id = 0
        self.requests = []  # every URL the page asked for
        self.console = []
        self.call("Network.enable")
        self.call("Page.enable")
        self.call("Runtime.enable")

    def _event(self, msg):
        m = msg.get("method")
        if m == "Network.requestWillBeSent":
            self.requests.append(msg["params"]["request"]["url"])
        elif m == "Runtime.exceptionThrown":
            self.console.append(json.dumps(msg["params"])[:400])
        elif m == "Runtime.consoleAPICalled" and \
                msg["params"].get("type") == "error":
            self.console.append(json.dumps(msg["params"]["args"])[:400])

    def call(self, method, **params):
        self.next_id += 1
        mid = self.next_id
        self.ws.send(json.dumps({"id": mid, "method": method,
                                 "params": params}))
        while True:
            msg = json.loads(self.ws.recv())
            if msg.get("id") == mid:
                if "error" in msg:
                    raise RuntimeError("%s: %s" % (method, msg["error"]))
                return msg.get("result", {})
            self._event(msg)

    def js(self, expr):
        r = self.call("Runtime.evaluate", expression=expr,
                      awaitPromise=True, returnByValue=True)
        if "exceptionDetails" in r:
            raise RuntimeError("js %r: %s" % (expr[:80],
                                              r["exceptionDetails"]))
        return r["result"].get("value")

    def wait(self, expr, what, timeout=WAIT_S):
        """Until `expr` is truthy; its value (None after timeout)."""
        deadline = time.time() + timeout
        while time.time() < deadline:
            try:
                # a DOM node comes back by value as {}: make it true
                v = self.js("(()=>{const v=(%s); return v instanceof Node"
                            " ? true : v})()" % expr)
            except RuntimeError:
                v = None
            if v:
                return v
            time.sleep(0.1)
        check(False, "waited %g s for %s" % (timeout, what))
        return None

    def go(self, url):
        self.call("Page.navigate", url=url)

    def text(self, sel="main"):
        return self.js("(document.querySelector(%s)||{}).innerText||''"
                       % json.dumps(sel))

    def size(self, width, height, mobile=False):
        self.call("Emulation.setDeviceMetricsOverride", width=width,
                  height=height, deviceScaleFactor=1, mobile=mobile)

    def shot(self, name):
        SHOTS.mkdir(parents=True, exist_ok=True)
        r = self.call("Page.captureScreenshot", format="png",
                      captureBeyondViewport=False)
        (SHOTS / name).write_bytes(base64.b64decode(r["data"]))

    def close(self):
        try:
            self.ws.close()
        except OSError:
            pass
        self.proc.terminate()
        try:
            self.proc.wait(20)
        except subprocess.TimeoutExpired:
            self.proc.kill()
            self.proc.wait()
        shutil.rmtree(self.profile, ignore_errors=True)


# WCAG 2.x relative luminance and contrast ratio (the W3C definition in
# "Web Content Accessibility Guidelines 2.1", 1.4.3 and its glossary),
# over every element that holds text directly; AA needs 4.5:1 for normal
# text. Backgrounds are taken from the nearest ancestor with an opaque
# background colour.
CONTRAST_JS = r"""(() => {
  const rgb = (s) => (s.match(/[\d.]+/g) || []).map(Number);
  const lum = ([r, g, b]) => {
    const f = (c) => { c /= 255; return c <= 0.03928 ? c / 12.92 : Math.pow((c + 0.055) / 1.055, 2.4); };
    return 0.2126 * f(r) + 0.7152 * f(g) + 0.0722 * f(b);
  };
  const bg = (e) => {
    for (; e; e = e.parentElement) {
      const c = rgb(getComputedStyle(e).backgroundColor);
      if (c.length === 3 || (c.length === 4 && c[3] === 1)) return c.slice(0, 3);
    }
    return [255, 255, 255];
  };
  const bad = [];
  for (const e of document.querySelectorAll('body *')) {
    if (!e.offsetParent && e.tagName !== 'BODY') continue;
    if (e.closest('svg')) continue;
    const own = [...e.childNodes].some((n) => n.nodeType === 3 && n.textContent.trim());
    if (!own) continue;
    const st = getComputedStyle(e);
    const l1 = lum(rgb(st.color).slice(0, 3)), l2 = lum(bg(e));
    const ratio = (Math.max(l1, l2) + 0.05) / (Math.min(l1, l2) + 0.05);
    if (ratio < 4.5) bad.push(e.tagName + ' ' + e.textContent.trim().slice(0, 30) + ' ' + ratio.toFixed(2));
  }
  return bad;
})()"""


def contrast(b, where):
    bad = b.js(CONTRAST_JS)
    check(bad == [], "text contrast at least 4.5:1 (WCAG AA) on %s: %s"
          % (where, bad[:5]))


def fill(b, sel, value):
    b.js("(()=>{const e=document.querySelector(%s); e.value=%s;"
         " e.dispatchEvent(new Event('input'))})()"
         % (json.dumps(sel), json.dumps(value)))


def open_runs(tmp):
    """Daemon without keys, demo models and two demo checks."""
    store = "sqlite:" + os.path.join(tmp, "open.db")
    subprocess.run([BIN, "register", "--store", store] +
                   [str(p) for p in sorted(DEMO.glob("*.model.json"))],
                   check=True, capture_output=True, timeout=60)
    d = Daemon(store, results=res)
    check(d.address is not None, "daemon started")
    ids = {}
    for f in ("theatre-list.fail.json", "microgrid-day.pass.json"):
        body = json.loads((DEMO / f).read_text())
        body["samples"] = 20000
        model = f.split(".")[0]
        st, _, b = d.request("POST", "/v1/models/%s/checks" % model, body)
        check(st == 201, "demo check %s: 201 (%s)" % (f, st))
        ids[f] = b.get("id") if isinstance(b, dict) else None
        # the request it ran with, as recorded, sent again repeats it
        st, _, req = d.request("GET", "/v1/checks/%s/request" % ids[f])
        check(st == 200 and req.get("decision") == body["decision"]
              and req.get("samples") == 20000 and req.get("seed") == body["seed"],
              "GET /v1/checks/{id}/request answers the request (%s)" % st)
        st, _, again = d.request("POST", "/v1/models/%s/checks" % model, req)
        check(st == 201 and again.get("joint") == b.get("joint"),
              "the recorded request repeats the check (%s)" % st)
    st, _, _ = d.request("GET", "/v1/checks/chk_nosuch/request")
    check(st == 404, "request of an unknown check: 404 (%s)" % st)
    return d, ids


def test_open(b, d, ids):
    base = "http://%s" % d.address
    st, h, raw = d.raw("GET", "/")
    csp = h.get("content-security-policy", "")
    check(st == 200 and h.get("content-type", "").startswith("text/html"),
          "GET / is HTML (%s %s)" % (st, h.get("content-type")))
    for part in ("default-src 'none'", "script-src 'self'",
                 "connect-src 'self'", "style-src 'self'",
                 "frame-ancestors 'none'"):
        check(part in csp, "CSP has %s: %s" % (part, csp))
    check(b"<script>" not in raw and b" style=" not in raw,
          "no inline script or style in the HTML")

    # Models
    b.size(1280, 800)
    b.go(base + "/")
    n = b.wait("document.querySelectorAll('#models .model').length", "models")
    check(n == 2, "two models listed (%s)" % n)
    b.wait("document.querySelector('#models').innerText.includes('decisions')",
           "model summary counts")
    txt = b.text()
    check("theatre-list" in txt and "microgrid-day" in txt,
          "both demo models by name")
    check("Day-surgery theatre list" in txt, "model title shown")
    b.shot("models-1280.png")
    b.go(base + "/#/model/theatre-list")
    b.wait("document.querySelector('pre.doc')", "model document")
    check('"late_team"' in b.text("pre.doc"), "model document formatted")
    check("version 1" in b.text(), "versions listed")

    # Checks
    b.go(base + "/#/checks")
    n = b.wait("document.querySelectorAll('#checks tbody tr').length",
               "check rows")
    check(n == 4, "four checks listed (%s)" % n)
    b.wait("document.querySelectorAll('#checks svg.iv').length == 4",
           "interval pictures in the history")
    txt = b.text("#checks")
    check("Fail" in txt and "Pass" in txt, "verdicts as words in the list")
    b.shot("checks-1280.png")
    contrast(b, "the check history")
    # the contrast probe itself: #999 on white is 2.85:1 and must be caught
    b.js("(()=>{const p=document.createElement('p'); p.id='probe';"
         "p.textContent='faint'; p.style.color='#999999';"
         "p.style.background='#ffffff'; document.querySelector('main')"
         ".append(p)})()")
    flagged = b.js(CONTRAST_JS)
    check(any("faint" in x and "2.85" in x for x in flagged),
          "the contrast probe catches #999 on white (2.85:1): %s" % flagged)
    b.js("document.getElementById('probe').remove()")
    b.go(base + "/#/checks?verdict=pass")
    b.wait("document.querySelectorAll('#checks tbody tr').length == 2",
           "verdict filter leaves the two passing checks")
    b.go(base + "/#/checks?model=theatre-list&limit=1")
    b.wait("document.querySelectorAll('#checks tbody tr').length == 2",
           "model filter leaves the two theatre-list checks")

    # One check
    fid = ids["theatre-list.fail.json"]
    st, _, c = d.request("GET", "/v1/checks/%s" % fid)
    b.go(base + "/#/check/%s" % fid)
    b.wait("document.querySelector('#rows')", "rows table")
    txt = b.text()
    check("Fail" in b.text("#verdict") and "falls short" in b.text("#verdict"),
          "check verdict in words: %r" % b.text("#verdict"))
    lo = "%.4f" % c["joint"]["interval"]["lower"]
    hi = "%.4f" % c["joint"]["interval"]["upper"]
    check(lo in b.text("#joint") and hi in b.text("#joint"),
          "joint interval %s..%s shown: %r" % (lo, hi, b.text("#joint")))
    nrows = b.js("document.querySelectorAll('#rows tbody tr').length")
    check(nrows == len(c["constraints"]),
          "one line per row: %s vs %d" % (nrows, len(c["constraints"])))
    check(c["constraints"][0]["name"] in b.text("#rows"), "row names shown")
    check(b.js("document.querySelectorAll('#rows svg').length") == nrows,
          "a bar per row")
    check(b.js("[...document.querySelectorAll('svg.iv')].some(s => "
               "(s.getAttribute('aria-label')||'').includes('below the target'))"),
          "the joint picture says the interval is below the target")
    check("scenario" in b.text("#failing"), "failing scenarios listed")
    b.shot("check-1280.png")
    contrast(b, "a check")
    b.size(390, 844, mobile=True)
    b.js("window.scrollTo(0,0)")
    time.sleep(0.3)
    b.shot("check-390.png")
    width = b.js("document.documentElement.scrollWidth")
    check(width is not None and width <= 400,
          "no sideways page scroll at 390 px (scrollWidth %s)" % width)
    b.go(base + "/#/checks")
    b.wait("document.querySelectorAll('#checks tbody tr').length", "rows")
    b.shot("checks-390.png")
    b.size(1280, 800)

    # Run a check from the form
    b.go(base + "/#/run?model=theatre-list")
    b.wait("document.querySelector('#runform')", "run form")
    ninputs = b.js("document.querySelectorAll('#runform .dec input').length")
    check(ninputs == 7, "seven decision values pre-filled (%s)" % ninputs)
    demo_start = json.loads((DEMO / "theatre-list.fail.json").read_text())[
        "decision"]["start"]
    shown = b.js("[...document.querySelectorAll('#runform .dec input')]"
                 ".slice(0,6).map(e => Number(e.value))")
    check(shown == demo_start and "last check" in b.text("#runform legend"),
          "decisions start from the model's last check: %s" % shown)
    fill(b, "#samples", "5000")
    fill(b, "#seed", "7")
    fill(b, "#label", "from the page")
    b.shot("run-1280.png")
    contrast(b, "the run form")
    # keyboard: the form's controls are reachable with Tab
    tabbable = b.js("[...document.querySelectorAll('#runform input, "
                    "#runform button')].every(e => e.tabIndex >= 0)")
    check(tabbable, "run form controls are in the tab order")
    b.js("document.querySelector('#submit').click()")
    b.wait("location.hash.startsWith('#/check/') && "
           "document.querySelector('#verdict')", "run result")
    check("from the page" in b.text("h1"), "run result shows its label")
    new_id = b.js("location.hash.slice(8)")
    st, _, c2 = d.request("GET", "/v1/checks/%s" % new_id)
    check(st == 200 and c2.get("label") == "from the page"
          and c2.get("samples_requested") == 5000 and c2.get("seed") == 7,
          "the page's check is in the log as sent (%s)" % st)
    check(c2.get("verdict", "?") in b.text("#verdict").lower(),
          "its verdict is shown")

    # A running check: progress and cancel
    body = json.loads((DEMO / "theatre-list.pass.json").read_text())
    body.update(samples=50_000_000, wait_s=0, label="long one")
    st, _, r = d.request("POST", "/v1/models/theatre-list/checks", body)
    check(st == 202, "long check accepted running (%s)" % st)
    rid = r.get("id")
    b.go(base + "/#/check/%s" % rid)
    b.wait("document.querySelector('#progress') && "
           "document.querySelector('#progress').value > 0", "progress")
    check("Running" in b.text("#progress-text"), "progress in words")
    b.shot("running-1280.png")
    b.js("document.querySelector('#cancel').click()")
    b.wait("document.querySelector('#verdict')", "cancelled check view")
    st, _, r = d.request("GET", "/v1/checks/%s" % rid)
    check(r.get("status") == "cancelled",
          "the check was cancelled (%s)" % r.get("status"))
    check("cancelled" in b.text("#verdict").lower(),
          "the page says cancelled: %r" % b.text("#verdict"))

    # Compare: two logged decisions (the newest two checks, ticked) and
    # one of the person's own
    b.go(base + "/#/compare?model=theatre-list")
    b.wait("document.querySelectorAll('#logged tbody tr').length >= 3",
           "logged checks offered")
    b.js("document.querySelector('#addcand').click()")
    fill(b, "#csamples", "4000")
    b.js("document.querySelector('#compare').click()")
    b.wait("document.querySelector('#pairs tbody tr')", "comparison pairs",
           timeout=60)
    check(b.js("document.querySelectorAll('#pairs tbody tr').length") == 3,
          "three paired differences for three candidates")
    check("from the page" in b.text("#compareout")
          and "long one" in b.text("#compareout"),
          "the logged candidates by label: %r" % b.text("#compareout")[:200])
    b.shot("compare-1280.png")
    # A comparison longer than the page's wait (1 s) answers 202; the page
    # follows it with GET /v1/comparisons/{id} until it ends. 30,000,000
    # samples for three candidates took 7.4 s on the 2-core test machine
    # (3,000,000 took 0.8 s once the engine got faster, and did not detach).
    fill(b, "#csamples", "30000000")
    b.js("document.querySelector('#compareout').replaceChildren()")
    b.js("document.querySelector('#compare').click()")
    b.wait("document.querySelector('#pairs tbody tr')",
           "comparison pairs after following a detached comparison",
           timeout=120)
    check(any("/v1/comparisons/" in u for u in b.requests),
          "the page followed the detached comparison")

    for url in b.requests:
        check(url.startswith(base + "/") or url == "about:blank",
              "request to the daemon only: %s" % url)
    check(len(b.requests) > 10, "requests recorded (%d)" % len(b.requests))


def test_keys(b, tmp):
    store = "sqlite:" + os.path.join(tmp, "keys.db")
    subprocess.run([BIN, "register", "--store", store,
                    str(DEMO / "theatre-list.model.json")],
                   check=True, capture_output=True, timeout=60)
    p = subprocess.run([BIN, "keys", "add", "viewer", "--role", "reader",
                        "--store", store], capture_output=True, text=True,
                       timeout=60)
    check(p.returncode == 0, "keys add: %s" % p.stderr.strip())
    key = p.stdout.strip().splitlines()[-1]
    d = Daemon(store)
    try:
        base = "http://%s" % d.address
        st, _, _ = d.raw("GET", "/")
        check(st == 200, "GET / needs no key (%s)" % st)
        st, _, _ = d.raw("GET", "/v1/models")
        check(st == 401, "the API does (%s)" % st)
        b.requests.clear()
        b.go(base + "/#/models")
        b.wait("!document.querySelector('#notice').hidden", "key notice")
        check("needs an API key" in b.text("#notice"),
              "the page asks for a key: %r" % b.text("#notice"))
        b.shot("key-1280.png")
        fill(b, "#key", key)
        b.js("document.querySelector('#keyform button[type=submit]').click()")
        b.wait("document.querySelectorAll('#models .model').length == 1",
               "models with the reader key")
        b.go(base + "/#/run?model=theatre-list")
        b.wait("document.querySelector('#runform')", "run form (reader)")
        fill(b, "#samples", "2000")
        b.js("document.querySelector('#submit').click()")
        msg = b.wait("(document.querySelector('#runout .error')||{})"
                     ".innerText", "403 sentence")
        check(bool(msg) and msg.startswith("Your key is not allowed")
              and "role" in msg, "403 as a sentence: %r" % msg)
        b.shot("forbidden-1280.png")
        contrast(b, "the 403 sentence")
        for url in b.requests:
            check(url.startswith(base + "/"),
                  "request to the daemon only: %s" % url)
    finally:
        d.stop()


def main():
    tmp = tempfile.mkdtemp(prefix="fg-page-store-")
    b = Browser()
    d = None
    try:
        d, ids = open_runs(tmp)
        test_open(b, d, ids)
        d.stop()
        d = None
        test_keys(b, tmp)
        check(not b.console, "no script errors: %s" % b.console[:3])
    finally:
        b.close()
        if d:
            d.stop()
        shutil.rmtree(tmp, ignore_errors=True)
    print("screenshots in %s" % SHOTS)
    return res.summary()


if __name__ == "__main__":
    sys.exit(main())
