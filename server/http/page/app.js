/*
 * server/http/page/app.js -- the page's behaviour: models, check history,
 * one check, run a check, compare candidates.
 *
 * Design: one script, no library, no build step. Views are chosen by the
 * address fragment (#/models, #/checks?..., #/check/ID, #/model/NAME,
 * #/run?model=NAME, #/compare?model=NAME) and drawn with DOM calls only
 * (text goes in as text nodes, never as HTML). Every request goes to the
 * daemon's documented /v1 API on the same origin, with the key the person
 * typed in (sessionStorage "feasgate.key") as Authorization: Bearer.
 * Problems the API answers are shown as sentences (title and detail).
 * Figures are inline SVG drawn to scale; verdicts are always words.
 * Logged decisions come from GET /v1/checks/{id}/request (the request a
 * check ran with): the run form starts from the model's last check, the
 * compare form offers the model's recent checks as candidates.
 */
'use strict';

const KEY = 'feasgate.key';
const SVGNS = 'http://www.w3.org/2000/svg';
const PAGE_ROWS = 20;
const POLL_MS = 600;
const LOGGED_ROWS = 20;
let viewToken = 0; // bumped on each navigation: stale polls stop

// ---- small helpers -------------------------------------------------------

function el(tag, attrs, ...kids) {
  const e = document.createElement(tag);
  for (const [k, v] of Object.entries(attrs || {})) {
    if (v === null || v === undefined || v === false) continue;
    if (k === 'on') for (const [ev, f] of Object.entries(v)) e.addEventListener(ev, f);
    else if (k === 'text') e.textContent = v;
    else e.setAttribute(k, v === true ? '' : String(v));
  }
  for (const k of kids.flat()) {
    if (k === null || k === undefined || k === false) continue;
    e.append(k instanceof Node ? k : document.createTextNode(String(k)));
  }
  return e;
}

function sv(tag, attrs, ...kids) {
  const e = document.createElementNS(SVGNS, tag);
  for (const [k, v] of Object.entries(attrs || {})) e.setAttribute(k, String(v));
  for (const k of kids) e.append(k instanceof Node ? k : document.createTextNode(String(k)));
  return e;
}

function fmtP(p) {
  if (p === null || p === undefined || !isFinite(p)) return '—';
  if (p !== 0 && Math.abs(p) < 0.0001) return p.toExponential(2);
  return p.toFixed(4);
}
function fmtN(x) {
  if (x === null || x === undefined || !isFinite(x)) return '—';
  return Math.abs(x) >= 1000 || Number.isInteger(x) ? String(Math.round(x * 100) / 100)
    : x.toPrecision(4);
}
function fmtIv(iv) {
  return iv ? '[' + fmtP(iv.lower) + ', ' + fmtP(iv.upper) + ']' : '—';
}
function when(t) { return t ? t.replace('T', ' ').replace(/:\d\dZ$/, ' UTC') : '—'; }
function shortDigest(d) { return (d || '').replace(/^sha256:/, '').slice(0, 12); }

const VERDICT_WORDS = {
  pass: 'Pass — meets the target',
  fail: 'Fail — falls short of the target',
  inconclusive: 'Inconclusive — cannot tell yet',
};
function verdictBadge(c, short) {
  let cls = 'other', word;
  if (c.status === 'running') { cls = 'running'; word = 'Running'; }
  else if (c.verdict && VERDICT_WORDS[c.verdict]) {
    cls = c.verdict;
    word = short ? c.verdict[0].toUpperCase() + c.verdict.slice(1) : VERDICT_WORDS[c.verdict];
  } else word = (c.status || 'unknown').replace('_', ' ');
  return el('span', { class: 'verdict ' + cls }, word);
}

function parseHash() {
  const h = location.hash.replace(/^#\/?/, '');
  const [path, q] = h.split('?');
  return { parts: path.split('/').filter(Boolean).map(decodeURIComponent),
           q: new URLSearchParams(q || '') };
}
function go(hash) { if (location.hash === hash) route(); else location.hash = hash; }

// ---- the API -------------------------------------------------------------

async function api(method, path, body) {
  const headers = { Accept: 'application/json' };
  const k = sessionStorage.getItem(KEY);
  if (k) headers.Authorization = 'Bearer ' + k;
  const init = { method, headers, credentials: 'omit', cache: 'no-store' };
  if (body !== undefined) {
    headers['Content-Type'] = 'application/json';
    init.body = JSON.stringify(body);
  }
  let r;
  try { r = await fetch(path, init); } catch (e) {
    return { status: 0, data: { title: 'no answer', detail: 'the daemon did not answer (' + e.message + ')' } };
  }
  const text = await r.text();
  let data = text;
  try { data = text ? JSON.parse(text) : null; } catch (e) { /* keep text */ }
  if (r.status === 401) askForKey(data);
  return { status: r.status, data, ok: r.status >= 200 && r.status < 300 };
}

/* An API problem as one sentence a person can act on. */
function sentence(res) {
  const d = res.data && typeof res.data === 'object' ? res.data : {};
  const detail = d.detail || d.title || (typeof res.data === 'string' ? res.data : '');
  if (res.status === 401)
    return 'This daemon needs an API key: type yours in the box at the top. (' + detail + ')';
  if (res.status === 403)
    return 'Your key is not allowed to do this: ' + detail + '.';
  if (res.status === 0) return 'The daemon did not answer: ' + detail + '.';
  return 'The daemon refused (' + res.status + (d.title ? ', ' + d.title : '') + '): ' + detail;
}
function problemBox(res) { return el('p', { class: 'error', role: 'alert' }, sentence(res)); }

function askForKey(data) {
  const n = document.getElementById('notice');
  n.hidden = false;
  n.textContent = sessionStorage.getItem(KEY)
    ? 'The daemon did not accept this key. Type another one in the box at the top.'
    : 'This daemon needs an API key. Type yours in the box at the top; it stays in this tab only.';
  void data;
}

function keyState() {
  const s = document.getElementById('keystate');
  s.textContent = sessionStorage.getItem(KEY) ? 'key in use (this tab only)' : 'no key';
}

// ---- logged decisions ----------------------------------------------------

/* The model's newest checks (up to n) from the log. */
async function loggedChecks(model, n) {
  const r = await api('GET', '/v1/checks?model=' + encodeURIComponent(model) + '&limit=' + n);
  return r.ok ? r.data.checks : [];
}
/* The request a check ran with, or null. */
async function checkRequest(id) {
  const r = await api('GET', '/v1/checks/' + encodeURIComponent(id) + '/request');
  return r.ok && r.data && r.data.decision ? r.data : null;
}

// ---- figures -------------------------------------------------------------

/* The interval against the target on a scale [lo, hi]; w x h pixels. */
function intervalFigure(iv, p, target, opts) {
  const o = Object.assign({ w: 620, h: 74, lo: 0, hi: 1, ticks: 5, small: false }, opts);
  const padL = o.small ? 2 : 14, padR = o.small ? 2 : 14;
  const x = (v) => padL + (Math.min(Math.max(v, o.lo), o.hi) - o.lo) / (o.hi - o.lo) * (o.w - padL - padR);
  const axisY = o.small ? o.h - 4 : o.h - 22;
  const g = sv('svg', { class: 'iv', viewBox: '0 0 ' + o.w + ' ' + o.h, width: o.w, height: o.h, role: 'img' });
  let label = 'Joint estimate ' + fmtP(p);
  if (iv) label += ', interval ' + fmtP(iv.lower) + ' to ' + fmtP(iv.upper);
  if (target !== null && target !== undefined) {
    label += ', target ' + target;
    if (iv) label += iv.lower >= target ? ', interval above the target'
      : iv.upper < target ? ', interval below the target' : ', interval crosses the target';
  }
  g.append(sv('title', {}, label));
  g.setAttribute('aria-label', label);
  g.append(sv('line', { x1: x(o.lo), x2: x(o.hi), y1: axisY, y2: axisY, stroke: '#4a5661', 'stroke-width': 1 }));
  if (!o.small) {
    for (let i = 0; i <= o.ticks; i++) {
      const v = o.lo + (o.hi - o.lo) * i / o.ticks;
      g.append(sv('line', { x1: x(v), x2: x(v), y1: axisY, y2: axisY + 4, stroke: '#4a5661' }));
      g.append(sv('text', { x: x(v), y: axisY + 16, 'text-anchor': i === 0 ? 'start' : i === o.ticks ? 'end' : 'middle' },
        +v.toFixed(4)));
    }
  }
  const top = o.small ? 3 : 14, bh = o.small ? o.h - 9 : 22;
  if (iv) {
    const x0 = x(iv.lower), x1 = x(iv.upper);
    g.append(sv('rect', { x: x0, y: top, width: Math.max(x1 - x0, 2), height: bh, fill: '#0a5f5b', 'fill-opacity': 0.35, stroke: '#0a5f5b' }));
  }
  if (p !== null && p !== undefined && isFinite(p))
    g.append(sv('line', { x1: x(p), x2: x(p), y1: top - 2, y2: top + bh + 2, stroke: '#1b2630', 'stroke-width': 2 }));
  if (target !== null && target !== undefined) {
    const tx = x(target);
    g.append(sv('line', { x1: tx, x2: tx, y1: 0, y2: axisY, stroke: '#b0006a', 'stroke-width': 2, 'stroke-dasharray': '4 3' }));
    if (!o.small) g.append(sv('text', { x: Math.min(tx + 4, o.w - 60), y: 10 }, 'target ' + target));
  }
  return g;
}

/* A zoomed scale that holds the interval and the target with a margin. */
function zoom(iv, p, target) {
  let lo = Math.min(iv ? iv.lower : p, target ?? 1), hi = Math.max(iv ? iv.upper : p, target ?? 0);
  const pad = Math.max((hi - lo) * 0.2, 0.005);
  return { lo: Math.max(0, lo - pad), hi: Math.min(1, hi + pad) };
}

/* A violation probability with its interval as a bar on [0, max]. */
function rowBar(row, max) {
  const w = 220, h = 18, x = (v) => Math.min(v / max, 1) * (w - 2) + 1;
  const g = sv('svg', { class: 'iv', viewBox: '0 0 ' + w + ' ' + h, width: w, height: h, role: 'img',
    'aria-label': row.name + ': violated with probability ' + fmtP(row.probability) });
  g.append(sv('rect', { x: 1, y: 3, width: w - 2, height: h - 6, fill: '#e6e1d4' }));
  g.append(sv('rect', { x: 1, y: 3, width: Math.max(x(row.probability) - 1, 0), height: h - 6, fill: '#a1261b', 'fill-opacity': 0.75 }));
  if (row.interval) {
    const a = x(row.interval.lower), b = x(row.interval.upper);
    g.append(sv('line', { x1: a, x2: b, y1: h / 2, y2: h / 2, stroke: '#1b2630', 'stroke-width': 2 }));
    g.append(sv('line', { x1: a, x2: a, y1: 2, y2: h - 2, stroke: '#1b2630' }));
    g.append(sv('line', { x1: b, x2: b, y1: 2, y2: h - 2, stroke: '#1b2630' }));
  }
  return g;
}

// ---- views ---------------------------------------------------------------

const main = () => document.getElementById('main');
function show(...nodes) { const m = main(); m.replaceChildren(...nodes); }

async function viewModels() {
  show(el('h1', {}, 'Models'), el('p', { class: 'muted' }, 'Loading…'));
  const res = await api('GET', '/v1/models');
  if (!res.ok) return show(el('h1', {}, 'Models'), problemBox(res));
  const grid = el('div', { class: 'grid', id: 'models' });
  for (const m of res.data.models) {
    const counts = el('p', { class: 'muted' }, '…');
    grid.append(el('section', { class: 'card model', 'data-model': m.name },
      el('h2', {}, el('a', { href: '#/model/' + encodeURIComponent(m.name) }, m.name), ' ',
        el('span', { class: 'muted' }, 'v' + m.version)),
      el('p', {}, m.title || ''),
      el('p', { class: 'mono' }, 'digest ' + shortDigest(m.digest)),
      counts,
      el('p', {}, el('a', { href: '#/checks?model=' + encodeURIComponent(m.name) }, 'Checks'), ' · ',
        el('a', { href: '#/run?model=' + encodeURIComponent(m.name) }, 'Run a check'), ' · ',
        el('a', { href: '#/compare?model=' + encodeURIComponent(m.name) }, 'Compare'))));
    api('GET', '/v1/models/' + encodeURIComponent(m.name)).then((r) => {
      if (!r.ok) { counts.replaceChildren(sentence(r)); return; }
      const s = r.data.summary || {};
      const n = (k, one, many) => (s[k] ?? '?') + ' ' + (s[k] === 1 ? one : many);
      counts.textContent = n('decisions', 'decision', 'decisions') + ' (' + n('decision_dims', 'value', 'values') + '), ' +
        n('uncertain', 'uncertain input', 'uncertain inputs') + ', ' + n('constraints', 'constraint', 'constraints') +
        ' (' + n('rows', 'row', 'rows') + ')';
    });
  }
  show(el('h1', {}, 'Models'),
    res.data.models.length ? grid : el('p', {}, 'No live models. Register one with POST /v1/models.'));
}

async function viewModel(name, q) {
  const res = await api('GET', '/v1/models/' + encodeURIComponent(name));
  if (!res.ok) return show(el('h1', {}, name), problemBox(res));
  const m = res.data;
  const versions = el('ul', {});
  for (let n = m.version; n >= 1; n--)
    versions.append(el('li', {}, el('a', { href: '#/model/' + encodeURIComponent(name) + '?version=' + n },
      'version ' + n), n === m.version ? ' (latest)' : ''));
  let doc = m.document, shown = m.version;
  const want = parseInt(q.get('version') || '', 10);
  if (want && want !== m.version) {
    const v = await api('GET', '/v1/models/' + encodeURIComponent(name) + '/versions/' + want);
    if (!v.ok) return show(el('h1', {}, name), problemBox(v));
    doc = v.data.document; shown = want;
  }
  const s = m.summary || {};
  show(el('h1', {}, name, ' ', el('span', { class: 'muted' }, 'v' + m.version)),
    el('p', {}, m.title || ''),
    el('dl', { class: 'kv' },
      el('dt', {}, 'digest'), el('dd', { class: 'mono' }, m.digest),
      el('dt', {}, 'registered'), el('dd', {}, m.created_at),
      ...Object.entries(s).map(([k, v]) => [el('dt', {}, k.replace(/_/g, ' ')), el('dd', {}, String(v))])),
    el('p', {}, el('a', { href: '#/run?model=' + encodeURIComponent(name) }, 'Run a check'), ' · ',
      el('a', { href: '#/checks?model=' + encodeURIComponent(name) }, 'Its checks')),
    el('h2', {}, 'Versions'), versions,
    el('h2', {}, 'Document of version ' + shown),
    el('pre', { class: 'doc', tabindex: 0, 'aria-label': 'model document' }, JSON.stringify(doc, null, 2)));
}

async function viewChecks(q) {
  const token = viewToken;
  const fields = ['model', 'verdict', 'label', 'since', 'key'];
  const inputs = {};
  const form = el('form', { class: 'filters', id: 'filters' });
  for (const f of fields) {
    let input;
    if (f === 'verdict') {
      input = el('select', { name: f }, el('option', { value: '' }, 'any'),
        ...['pass', 'fail', 'inconclusive'].map((v) => el('option', { value: v }, v)));
      input.value = q.get(f) || '';
    } else {
      input = el('input', { name: f, value: q.get(f) || '', size: 14,
        placeholder: f === 'since' ? '2026-12-01T00:00:00Z' : '' });
    }
    inputs[f] = input;
    form.append(el('label', {}, f, input));
  }
  form.append(el('button', { type: 'submit' }, 'Show'));
  form.addEventListener('submit', (e) => {
    e.preventDefault();
    const p = new URLSearchParams();
    for (const f of fields) if (inputs[f].value) p.set(f, inputs[f].value);
    go('#/checks?' + p.toString());
  });
  const api_q = new URLSearchParams();
  for (const f of fields) if (q.get(f)) api_q.set(f, q.get(f));
  api_q.set('limit', String(PAGE_ROWS));
  if (q.get('after')) api_q.set('after', q.get('after'));
  show(el('h1', {}, 'Checks'), form, el('p', { class: 'muted' }, 'Loading…'));
  const res = await api('GET', '/v1/checks?' + api_q.toString());
  if (token !== viewToken) return;
  if (!res.ok) return show(el('h1', {}, 'Checks'), form, problemBox(res));
  const body = el('tbody', {});
  const table = el('table', { id: 'checks' },
    el('thead', {}, el('tr', {}, el('th', {}, 'Verdict'), el('th', {}, 'Label'), el('th', { class: 'opt' }, 'Model'),
      el('th', {}, 'Joint estimate'), el('th', {}, 'Interval against target'), el('th', { class: 'opt' }, 'Created'))),
    body);
  for (const c of res.data.checks) {
    const fig = el('span', { class: 'muted' }, '…');
    const j = c.joint || {};
    body.append(el('tr', { 'data-check': c.id },
      el('td', {}, el('a', { href: '#/check/' + c.id }, verdictBadge(c, true))),
      el('td', {}, el('a', { href: '#/check/' + c.id }, c.label || c.id)),
      el('td', { class: 'opt' }, c.model.name + ' v' + c.model.version),
      el('td', { class: 'num' }, fmtP(j.probability), el('br', {}), el('span', { class: 'muted nowrap' }, fmtIv(j.interval))),
      el('td', {}, fig),
      el('td', { class: 'opt nowrap' }, when(c.created_at))));
    // The list carries no target: the check itself does.
    api('GET', '/v1/checks/' + encodeURIComponent(c.id)).then((r) => {
      if (!r.ok) { fig.textContent = '—'; return; }
      const d = r.data, jj = d.joint || d.progress || {};
      fig.replaceWith(intervalFigure(jj.interval, jj.probability, d.target, { w: 160, h: 22, small: true }));
    });
  }
  const pager = el('div', { class: 'pager' });
  if (q.get('after')) {
    const p = new URLSearchParams(q); p.delete('after');
    pager.append(el('a', { href: '#/checks?' + p.toString() }, 'Newest'));
  }
  if (res.data.next) {
    const p = new URLSearchParams(q); p.set('after', res.data.next);
    pager.append(el('a', { href: '#/checks?' + p.toString(), id: 'older' }, 'Older checks'));
  }
  show(el('h1', {}, 'Checks'), form,
    res.data.checks.length ? el('div', { class: 'scroll' }, table) : el('p', {}, 'No checks match.'),
    pager);
}

function listOrNone(items, render) {
  if (!items || !items.length) return el('p', { class: 'muted' }, 'None.');
  return el('ul', {}, items.map((x) => el('li', {}, render(x))));
}
function describe(x) {
  if (x === null || typeof x !== 'object') return String(x);
  return Object.entries(x).map(([k, v]) => k + ': ' + (typeof v === 'object' && v !== null ? JSON.stringify(v) : v)).join('; ');
}

async function viewCheck(id) {
  const token = viewToken;
  const res = await api('GET', '/v1/checks/' + encodeURIComponent(id));
  if (token !== viewToken) return;
  if (!res.ok) return show(el('h1', {}, 'Check ' + id), problemBox(res));
  const c = res.data;
  const head = [el('h1', {}, c.label || 'Check'),
    el('p', { class: 'mono muted' }, c.id + ' · ',
      el('a', { href: '#/model/' + encodeURIComponent(c.model.name) }, c.model.name + ' v' + c.model.version),
      ' · ' + shortDigest(c.model.digest))];
  if (c.status === 'running') return showRunning(c, head, token);
  const j = c.joint || {};
  const out = [...head,
    el('p', { class: 'big', id: 'verdict' }, verdictBadge(c, false), ' ',
      c.verdict ? 'at target ' + c.target + ' with confidence ' + c.confidence : '')];
  if (j.interval || isFinite(j.probability)) {
    out.push(el('h2', {}, 'Joint feasibility against the target'),
      el('p', { id: 'joint' }, 'Estimate ', el('strong', {}, fmtP(j.probability)), ', interval ',
        el('strong', {}, fmtIv(j.interval)), j.interval && j.interval.method ? ' (' + j.interval.method.replace('_', '-') + ')' : '',
        ' from ' + (j.samples ?? '?') + ' samples, ' + (j.satisfied ?? '?') + ' satisfied every row.'),
      el('p', { class: 'muted' }, 'Shaded box: the interval; black line: the estimate; dashed line: the target. Zoomed:'),
      intervalFigure(j.interval, j.probability, c.target, zoom(j.interval, j.probability, c.target)),
      el('p', { class: 'muted' }, 'Whole scale 0 to 1:'),
      intervalFigure(j.interval, j.probability, c.target, { h: 56 }));
  }
  out.push(el('dl', { class: 'kv' },
    ...[['status', c.status], ['target', c.target], ['confidence', c.confidence], ['samples requested', c.samples_requested],
      ['seed', c.seed], ['sampling', c.sampling], ['stopped early', c.stopped_early], ['samples to settle', c.samples_to_settle],
      ['objective', c.objective !== undefined && c.objective !== null ? fmtN(c.objective) + ' (' + (c.objective_sense || '') + ')' : null],
      ['created', c.created_at], ['finished', c.finished_at], ['elapsed', c.elapsed_ms !== undefined ? c.elapsed_ms + ' ms' : null],
      ['key', c.key]]
      .filter(([, v]) => v !== null && v !== undefined)
      .map(([k, v]) => [el('dt', {}, k), el('dd', {}, String(v))])));
  if (c.slack_to_target !== undefined) out.push(el('h2', {}, 'Slack to the target'), el('p', { id: 'slack' }, describe(c.slack_to_target)));
  if (c.drivers !== undefined) out.push(el('h2', {}, 'Drivers'),
    Array.isArray(c.drivers) ? listOrNone(c.drivers, describe) : el('p', {}, describe(c.drivers)));
  const rows = c.constraints || [];
  if (rows.length) {
    const max = Math.max(...rows.map((r) => (r.interval ? r.interval.upper : r.probability) || 0), 1e-9);
    const scaleMax = Math.min(1, max * 1.1);
    out.push(el('h2', {}, 'Rows: probability of violation'),
      el('p', { class: 'muted' }, 'Bars run from 0 to ' + fmtP(scaleMax) + '; the black whisker is the row\'s interval.'),
      el('div', { class: 'scroll' }, el('table', { class: 'rows', id: 'rows' },
        el('thead', {}, el('tr', {}, el('th', {}, 'Row'), el('th', {}, 'Violated'), el('th', {}, 'Probability'),
          el('th', { class: 'opt' }, 'Interval'), el('th', { class: 'opt' }, 'Excess mean / if violated / p95 / max'),
          el('th', { class: 'opt' }, 'Sole cause'))),
        el('tbody', {}, rows.map((r) => el('tr', {},
          el('td', { class: 'mono' }, r.name, r.deterministic ? ' (fixed)' : ''),
          el('td', {}, rowBar(r, scaleMax)),
          el('td', { class: 'num' }, fmtP(r.probability)),
          el('td', { class: 'num opt' }, fmtIv(r.interval)),
          el('td', { class: 'num opt' }, r.excess ? [r.excess.mean, r.excess.mean_if_violated, r.excess.p95, r.excess.max].map(fmtN).join(' / ') : '—'),
          el('td', { class: 'num opt' }, r.sole_cause ?? '—')))))));
  }
  const fs = c.failing_scenarios || [];
  out.push(el('h2', {}, 'Failing scenarios'));
  if (!fs.length) out.push(el('p', { class: 'muted' }, 'None kept.'));
  else {
    const box = el('div', { id: 'scenario' });
    out.push(el('ul', { id: 'failing' }, fs.map((s) => el('li', {}, 'scenario ' + s.index + ': ' + (s.violated || []).join(', ') + ' ',
      el('button', { type: 'button', class: 'quiet', on: { click: () => showScenario(c.id, s.index, box) } }, 'Inputs')))), box);
  }
  const num = c.numeric || { problems: [] };
  out.push(el('h2', {}, 'Numeric problems'), listOrNone(num.problems, describe));
  if (num.problems_not_listed) out.push(el('p', {}, num.problems_not_listed + ' more not listed.'));
  out.push(el('h2', {}, 'Deterministic problems'), listOrNone((c.deterministic || {}).problems, describe));
  if (c.decision_problems) out.push(el('h2', {}, 'Decision problems'), listOrNone(c.decision_problems, describe));
  show(...out);
}

async function showScenario(id, index, box) {
  const r = await api('GET', '/v1/checks/' + encodeURIComponent(id) + '/scenarios/' + index);
  if (r.status === 404 || r.status === 405)
    box.replaceChildren(el('p', { class: 'muted' }, 'This daemon does not serve the inputs of one scenario.'));
  else if (!r.ok) box.replaceChildren(problemBox(r));
  else box.replaceChildren(el('h2', {}, 'Scenario ' + index),
    el('pre', { class: 'doc' }, typeof r.data === 'string' ? r.data : JSON.stringify(r.data, null, 2)));
}

function showRunning(c, head, token) {
  const pr = c.progress || {};
  const bar = el('progress', { class: 'progress', id: 'progress', max: c.samples_requested || 1, value: pr.samples_done || 0 });
  const text = el('p', { id: 'progress-text', role: 'status' });
  const msg = el('div', {});
  const fig = el('div', {});
  const cancel = el('button', { type: 'button', class: 'danger', id: 'cancel' }, 'Cancel this check');
  const update = (d) => {
    const p = d.progress || {};
    bar.value = p.samples_done || 0;
    text.textContent = 'Running: ' + (p.samples_done || 0) + ' of ' + (d.samples_requested || '?') +
      ' samples; estimate so far ' + fmtP(p.probability) + ' ' + fmtIv(p.interval) + '.';
    if (p.interval) fig.replaceChildren(intervalFigure(p.interval, p.probability, d.target, { h: 56 }));
  };
  cancel.addEventListener('click', async () => {
    cancel.disabled = true;
    const r = await api('DELETE', '/v1/checks/' + encodeURIComponent(c.id));
    if (!r.ok) { msg.replaceChildren(problemBox(r)); cancel.disabled = false; return; }
    if (token === viewToken) viewCheck(c.id);
  });
  update(c);
  show(...head, el('p', { class: 'big' }, verdictBadge(c, false)), bar, text, fig, cancel, msg);
  const poll = async () => {
    if (token !== viewToken) return;
    const r = await api('GET', '/v1/checks/' + encodeURIComponent(c.id));
    if (token !== viewToken) return;
    if (!r.ok) { msg.replaceChildren(problemBox(r)); return; }
    if (r.data.status !== 'running') { viewCheck(c.id); return; }
    update(r.data);
    setTimeout(poll, POLL_MS);
  };
  setTimeout(poll, POLL_MS);
}

// ---- decisions from a model document ------------------------------------

function boundAt(b, i) { return Array.isArray(b) ? b[i] : b; }
function defaultDecision(doc) {
  const out = {};
  for (const d of doc.decisions || []) {
    const vals = [];
    const n = d.size || 1;
    for (let i = 0; i < n; i++) {
      const lo = boundAt(d.lower, i), hi = boundAt(d.upper, i);
      let v = isFinite(lo) && isFinite(hi) ? (lo + hi) / 2 : isFinite(lo) ? lo : isFinite(hi) ? hi : 0;
      if (d.integer) v = Math.round(v);
      vals.push(v);
    }
    out[d.name] = d.size ? vals : vals[0];
  }
  return out;
}

async function modelPicker(current, hashBase) {
  const res = await api('GET', '/v1/models');
  if (!res.ok) return { error: res };
  const sel = el('select', { id: 'model' }, el('option', { value: '' }, 'choose a model'),
    res.data.models.map((m) => el('option', { value: m.name }, m.name + ' — ' + (m.title || ''))));
  sel.value = current || '';
  sel.addEventListener('change', () => go(hashBase + '?model=' + encodeURIComponent(sel.value)));
  return { node: el('label', { class: 'pick' }, 'Model ', sel) };
}

async function viewRun(q) {
  const name = q.get('model') || '';
  const pick = await modelPicker(name, '#/run');
  if (pick.error) return show(el('h1', {}, 'Run a check'), problemBox(pick.error));
  if (!name) return show(el('h1', {}, 'Run a check'), pick.node);
  const m = await api('GET', '/v1/models/' + encodeURIComponent(name));
  if (!m.ok) return show(el('h1', {}, 'Run a check'), pick.node, problemBox(m));
  const doc = m.data.document;
  const lastCheck = (await loggedChecks(name, 1))[0];
  const lastReq = lastCheck ? await checkRequest(lastCheck.id) : null;
  const start = lastReq ? lastReq.decision : defaultDecision(doc);
  const inputs = [];
  const form = el('form', { class: 'form', id: 'runform' });
  const fs = el('fieldset', {}, el('legend', {}, lastReq
    ? 'Decisions (from the last check of this model: ' + (lastCheck.label || lastCheck.id) + ')'
    : 'Decisions (middle of their bounds)'));
  for (const d of doc.decisions || []) {
    const row = el('div', { class: 'dec' });
    const vals = Array.isArray(start[d.name]) ? start[d.name] : [start[d.name]];
    vals.forEach((v, i) => {
      const inp = el('input', { type: 'number', step: d.integer ? 1 : 'any', value: v, required: true,
        name: d.name + (d.size ? '[' + i + ']' : ''), 'aria-label': d.name + (d.size ? '[' + i + ']' : ''),
        min: boundAt(d.lower, i), max: boundAt(d.upper, i) });
      inputs.push({ d, i, inp });
      row.append(inp);
    });
    fs.append(el('p', {}, el('strong', { class: 'mono' }, d.name), ' ', el('span', { class: 'muted' },
      'bounds ' + JSON.stringify(d.lower ?? null) + ' to ' + JSON.stringify(d.upper ?? null) + (d.integer ? ', whole numbers' : ''))), row);
  }
  const f = (label, attrs) => { const i = el('input', attrs); form.append(el('label', {}, label, i)); return i; };
  form.append(fs);
  const samples = f('Samples', { type: 'number', id: 'samples', min: 1, step: 1, value: 20000, required: true });
  const seed = f('Seed (empty: drawn)', { type: 'number', id: 'seed', min: 0, step: 1 });
  const target = f('Target (empty: the model\'s)', { type: 'number', id: 'target', min: 0, max: 1, step: 'any' });
  const label = f('Label', { type: 'text', id: 'label', maxlength: 200 });
  const submit = el('button', { type: 'submit', id: 'submit' }, 'Run the check');
  form.append(el('div', {}, submit));
  const out = el('div', { id: 'runout', 'aria-live': 'polite' });
  form.addEventListener('submit', async (e) => {
    e.preventDefault();
    const decision = {};
    for (const { d, i, inp } of inputs) {
      const v = Number(inp.value);
      if (d.size) (decision[d.name] = decision[d.name] || [])[i] = v; else decision[d.name] = v;
    }
    const body = { decision, samples: Number(samples.value), wait_s: 2 };
    if (seed.value !== '') body.seed = Number(seed.value);
    if (target.value !== '') body.target = Number(target.value);
    if (label.value) body.label = label.value;
    submit.disabled = true;
    out.replaceChildren(el('p', {}, 'Sending…'));
    const r = await api('POST', '/v1/models/' + encodeURIComponent(name) + '/checks', body);
    submit.disabled = false;
    if (r.data && r.data.id && (r.ok || r.status === 202)) {
      go('#/check/' + r.data.id);
    } else out.replaceChildren(problemBox(r));
  });
  show(el('h1', {}, 'Run a check'), pick.node, el('p', {}, m.data.title || ''), form, out);
}

async function viewCompare(q) {
  const token = viewToken;
  const name = q.get('model') || '';
  const pick = await modelPicker(name, '#/compare');
  if (pick.error) return show(el('h1', {}, 'Compare'), problemBox(pick.error));
  if (!name) return show(el('h1', {}, 'Compare'), pick.node);
  const m = await api('GET', '/v1/models/' + encodeURIComponent(name));
  if (!m.ok) return show(el('h1', {}, 'Compare'), pick.node, problemBox(m));
  const logged = (await loggedChecks(name, LOGGED_ROWS)).filter((c) => c.status !== 'failed');
  if (token !== viewToken) return;
  // Logged decisions: the model's recent checks, the newest two ticked.
  const picks = [];
  const tbody = el('tbody', {}, logged.map((c, i) => {
    const cb = el('input', { type: 'checkbox', checked: i < 2, 'aria-label': 'compare ' + (c.label || c.id) });
    picks.push({ c, cb });
    return el('tr', {}, el('td', {}, cb), el('td', {}, c.label || '(no label)'), el('td', {}, verdictBadge(c, true)),
      el('td', { class: 'num' }, fmtP(c.joint && c.joint.probability)),
      el('td', { class: 'mono opt' }, el('a', { href: '#/check/' + c.id }, c.id)));
  }));
  const list = el('div', { id: 'candidates' });
  const addCand = (c) => {
    const lab = el('input', { type: 'text', value: c.label, 'aria-label': 'candidate label' });
    const ta = el('textarea', { rows: 2, cols: 50, class: 'mono', 'aria-label': 'decision (JSON)' });
    ta.value = JSON.stringify(c.decision);
    const rm = el('button', { type: 'button', class: 'quiet' }, 'Remove');
    const card = el('div', { class: 'card cand' }, lab, ' ', rm, el('br', {}), ta);
    rm.addEventListener('click', () => card.remove());
    list.append(card);
  };
  const more = el('button', { type: 'button', class: 'quiet', id: 'addcand' }, 'Add a decision of your own');
  more.addEventListener('click', () => addCand({ label: 'own ' + (list.children.length + 1), decision: defaultDecision(m.data.document) }));
  const samples = el('input', { type: 'number', id: 'csamples', value: 20000, min: 1 });
  const go_ = el('button', { type: 'submit', id: 'compare' }, 'Compare');
  const out = el('div', { id: 'compareout', 'aria-live': 'polite' });
  const form = el('form', {},
    logged.length ? el('div', { class: 'scroll' }, el('table', { class: 'rows', id: 'logged' },
      el('thead', {}, el('tr', {}, el('th', {}, 'Use'), el('th', {}, 'Label'), el('th', {}, 'Verdict'),
        el('th', {}, 'Estimate'), el('th', { class: 'opt' }, 'Check'))), tbody))
      : el('p', { class: 'muted' }, 'No checks of this model yet; add decisions of your own.'),
    list, more, el('p', {}, el('label', {}, 'Samples ', samples)), go_);
  form.addEventListener('submit', async (e) => {
    e.preventDefault();
    const candidates = [];
    const seen = new Set();
    const add = (label, decision) => {
      let l = label, k = 2;
      while (seen.has(l)) l = label + ' #' + k++;
      seen.add(l);
      candidates.push({ label: l, decision });
    };
    go_.disabled = true;
    for (const { c, cb } of picks) {
      if (!cb.checked) continue;
      const req = await checkRequest(c.id);
      if (!req) {
        out.replaceChildren(el('p', { class: 'error', role: 'alert' }, 'The request of check ' + c.id + ' could not be read.'));
        go_.disabled = false;
        return;
      }
      add(c.label || c.id, req.decision);
    }
    for (const card of list.querySelectorAll('.cand')) {
      const lab = card.querySelector('input');
      try { add(lab.value || 'own', JSON.parse(card.querySelector('textarea').value)); } catch (err) {
        out.replaceChildren(el('p', { class: 'error', role: 'alert' }, 'Candidate "' + lab.value + '": the decision is not JSON (' + err.message + ').'));
        go_.disabled = false;
        return;
      }
    }
    if (candidates.length < 2) {
      out.replaceChildren(el('p', { class: 'error', role: 'alert' }, 'Pick two or more candidates.'));
      go_.disabled = false;
      return;
    }
    out.replaceChildren(el('p', {}, 'Comparing…'));
    let r = await api('POST', '/v1/models/' + encodeURIComponent(name) + '/comparisons',
      { candidates, samples: Number(samples.value), wait_s: 1 });
    // A detached comparison answers 202 with its id: follow it.
    while (r.status === 202 && r.data && r.data.id && token === viewToken) {
      out.replaceChildren(el('p', {}, 'Running…'));
      await new Promise((ok) => setTimeout(ok, POLL_MS));
      r = await api('GET', '/v1/comparisons/' + encodeURIComponent(r.data.id));
      if (r.ok && r.data && r.data.status === 'running') r = { status: 202, data: r.data };
    }
    go_.disabled = false;
    if (!r.ok) { out.replaceChildren(problemBox(r)); return; }
    out.replaceChildren(...comparisonResult(r.data));
  });
  show(el('h1', {}, 'Compare'), pick.node,
    el('p', { class: 'muted' }, 'Candidates: decisions of this model\'s logged checks, and any of your own. ' +
      'All are evaluated on the same scenarios.'), form, out);
}

function comparisonResult(d) {
  const cands = el('ul', {}, (d.candidates || []).map((c) => el('li', {}, c.label + ': ', verdictBadge(c, true), ' ',
    fmtP(c.joint && c.joint.probability), ' ', fmtIv(c.joint && c.joint.interval), ' ',
    c.id ? el('a', { href: '#/check/' + c.id }, 'check') : '')));
  const rows = (d.pairs || []).map((p) => {
    const lo = -1, hi = 1, w = 220, h = 18, x = (v) => (v - lo) / (hi - lo) * (w - 2) + 1;
    const g = sv('svg', { class: 'iv', viewBox: '0 0 ' + w + ' ' + h, width: w, height: h, role: 'img',
      'aria-label': 'difference ' + fmtP(p.difference) + ' interval ' + fmtIv(p.interval) });
    g.append(sv('line', { x1: x(0), x2: x(0), y1: 0, y2: h, stroke: '#b0006a', 'stroke-dasharray': '3 2' }));
    g.append(sv('line', { x1: x(p.interval.lower), x2: Math.max(x(p.interval.upper), x(p.interval.lower) + 2), y1: h / 2, y2: h / 2, stroke: '#0a5f5b', 'stroke-width': 6 }));
    g.append(sv('line', { x1: x(p.difference), x2: x(p.difference), y1: 2, y2: h - 2, stroke: '#1b2630', 'stroke-width': 2 }));
    const word = p.interval.lower > 0 ? p.a + ' holds more often' : p.interval.upper < 0 ? p.b + ' holds more often' : 'no clear difference';
    return el('tr', {}, el('td', {}, p.a + ' − ' + p.b), el('td', { class: 'num' }, fmtP(p.difference)),
      el('td', { class: 'num' }, fmtIv(p.interval)), el('td', {}, g), el('td', {}, word),
      el('td', { class: 'num opt' }, (p.a_only ?? '') + ' / ' + (p.b_only ?? '')));
  });
  return [el('h2', {}, 'Candidates'), cands, el('h2', {}, 'Paired differences (A minus B)'),
    el('div', { class: 'scroll' }, el('table', { class: 'rows', id: 'pairs' },
      el('thead', {}, el('tr', {}, el('th', {}, 'Pair'), el('th', {}, 'Difference'), el('th', {}, 'Interval'),
        el('th', {}, 'On −1 … 1'), el('th', {}, 'Reading'), el('th', { class: 'opt' }, 'Only A / only B'))),
      el('tbody', {}, rows)))];
}

// ---- routing -------------------------------------------------------------

async function route() {
  viewToken++;
  const { parts, q } = parseHash();
  const top = parts[0] || 'models';
  for (const a of document.querySelectorAll('nav a')) {
    const on = a.dataset.nav === top || (top === 'check' && a.dataset.nav === 'checks') ||
      (top === 'model' && a.dataset.nav === 'models');
    if (on) a.setAttribute('aria-current', 'page'); else a.removeAttribute('aria-current');
  }
  try {
    if (top === 'models') await viewModels();
    else if (top === 'model' && parts[1]) await viewModel(parts[1], q);
    else if (top === 'checks') await viewChecks(q);
    else if (top === 'check' && parts[1]) await viewCheck(parts[1]);
    else if (top === 'run') await viewRun(q);
    else if (top === 'compare') await viewCompare(q);
    else show(el('h1', {}, 'Not here'), el('p', {}, el('a', { href: '#/models' }, 'Models')));
  } catch (e) {
    show(el('h1', {}, 'Something went wrong'), el('p', { class: 'error', role: 'alert' }, String(e)));
  }
}

document.addEventListener('DOMContentLoaded', () => {
  const form = document.getElementById('keyform');
  const input = document.getElementById('key');
  form.addEventListener('submit', (e) => {
    e.preventDefault();
    if (input.value.trim()) sessionStorage.setItem(KEY, input.value.trim());
    input.value = '';
    document.getElementById('notice').hidden = true;
    keyState();
    route();
  });
  document.getElementById('forget').addEventListener('click', () => {
    sessionStorage.removeItem(KEY);
    keyState();
    route();
  });
  keyState();
  window.addEventListener('hashchange', () => {
    route().then(() => main().focus({ preventScroll: false }));
  });
  route();
});
