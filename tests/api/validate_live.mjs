// validate_live.mjs — live responses of `swapspec serve` against the spec.
//
// Starts the daemon on 127.0.0.1 port 0 with a store in a fresh temporary
// directory (reading the port from its "listening" log line), calls every
// route with good and bad input, and validates each response — status,
// Content-Type, documented headers and body — against the response the spec
// documents for that route and status (SwaggerParser.dereference, then Ajv
// for JSON Schema 2020-12 with ajv-formats).  Problem responses are checked
// the same way.  Besides the schemas it checks what the contract promises
// beyond them (JSON pointers of faulty fields, idempotent replay, keyset
// pagination, metrics that count what was sent, a clean SIGTERM).  Another
// daemon covers named calibrations, analyses by reference, revisions and
// reprocessing jobs (issue 5); one with a tokens file checks 401/403.  Numerical spot checks use
// identities of the model, not output copied from swapspec:
//   E[c] = C(n,2)·P2 (docs: /work/shared/domain.md §2, exact identity; we
//   allow 1e-9 relative for the printed 15 significant digits), content sums
//   by hand (c(4,1,1) = c(3,3) = 3), and the calibration formula
//   E = offset + pair_shift·C(n,2) + exchange·c (samples/README.md), so that
//   an offset change Δ moves the P2 read from a mean by −Δ/(exchange·C(n,2)).
//
// Usage: node validate_live.mjs path/to/swapspec
// Prints one line per check and ends with "N passed, N failed".
import { spawn, spawnSync } from 'node:child_process';
import crypto from 'node:crypto';
import fs from 'node:fs';
import http from 'node:http';
import net from 'node:net';
import os from 'node:os';
import path from 'node:path';
import { isDeepStrictEqual } from 'node:util';
import SwaggerParser from '@apidevtools/swagger-parser';
import {
  HTTP_METHODS,
  REPO,
  SPEC_PATH,
  Tally,
  formatAjvErrors,
  makeAjv,
  makeValidatorCache,
  matchMediaType,
} from './lib.mjs';

const t = new Tally();
let spec;
let compile;
let onCreated = null; // called with the body of every 201, valid or not

// Quillfeather lab calibrations (samples/calibration-boxtrap-*.json).
const TRAP_A = { offset: 12.5, pair_shift: 0.8, exchange: -3.1, noise_sd: 0.6, unit: 'Hz' };
const TRAP_B = { offset: -4.0, pair_shift: 1.15, exchange: 2.4, noise_sd: 1.9, unit: 'Hz' };
const BODY_LIMIT = 1024 * 1024; // the contract's default body cap

// ---------------------------------------------------------------------------
// Daemon handling

// Daemons still running when the script ends (a crash) are killed.
const running = new Set();
process.on('exit', () => {
  for (const child of running) child.kill('SIGKILL');
});

class Daemon {
  constructor(bin, name) {
    this.bin = bin;
    this.name = name;
    this.logLines = [];
    this.child = null;
    this.port = 0;
    this.exit = null;
    this.answered = 0; // requests that got a response
  }

  // Resolves with the port from the "listening" line, or rejects.
  start(extraArgs, dir) {
    const env = { ...process.env };
    for (const k of Object.keys(env)) if (k.startsWith('SWAPSPEC_')) delete env[k];
    const args = ['serve', '--listen', '127.0.0.1:0', '--data', path.join(dir, 't.db'), ...extraArgs];
    this.child = spawn(this.bin, args, { stdio: ['ignore', 'ignore', 'pipe'], env });
    running.add(this.child);
    this.exited = new Promise((resolve) => {
      this.child.on('exit', (code, signal) => {
        running.delete(this.child);
        this.exit = { code, signal, at: Date.now() };
        resolve(this.exit);
      });
    });
    return new Promise((resolve, reject) => {
      let buf = '';
      const timer = setTimeout(() => reject(new Error(`no "listening" line within 15 s; stderr so far:\n${this.logLines.join('\n')}`)), 15000);
      this.child.stderr.setEncoding('utf8');
      this.child.stderr.on('data', (d) => {
        buf += d;
        let i;
        while ((i = buf.indexOf('\n')) >= 0) {
          const line = buf.slice(0, i);
          buf = buf.slice(i + 1);
          this.logLines.push(line);
          if (this.port) continue;
          try {
            const j = JSON.parse(line);
            if (j && j.event === 'listening' && Number.isInteger(j.port) && j.port > 0) {
              this.port = j.port;
              clearTimeout(timer);
              resolve(j);
            }
          } catch {
            /* not JSON: judged in checkLogLines */
          }
        }
      });
      this.child.on('error', (e) => {
        clearTimeout(timer);
        reject(e);
      });
      this.exited.then((x) => {
        clearTimeout(timer);
        if (!this.port) reject(new Error(`exited (${JSON.stringify(x)}) before listening; stderr:\n${this.logLines.join('\n')}`));
      });
    });
  }

  // SIGTERM, then wait up to 10 s for the exit.
  async stop() {
    if (!this.child || this.exit) return this.exit;
    const t0 = Date.now();
    this.child.kill('SIGTERM');
    const res = await Promise.race([this.exited, new Promise((r) => setTimeout(() => r(null), 10000))]);
    if (!res) {
      this.child.kill('SIGKILL');
      await this.exited;
      return { code: null, signal: 'timeout', ms: Date.now() - t0 };
    }
    return { ...res, ms: res.at - t0 };
  }
}

// ---------------------------------------------------------------------------
// HTTP client (node:http, one connection per request, so that framing
// problems of one request cannot leak into the next).

function call(port, { method, path: p, headers = {}, body, chunks, expectContinue = false, timeout = 60000 }) {
  return new Promise((resolve) => {
    const t0 = Date.now();
    const h = { ...headers };
    const payload = body === undefined ? undefined : Buffer.isBuffer(body) ? body : Buffer.from(typeof body === 'string' ? body : JSON.stringify(body));
    if (payload !== undefined && !chunks && !Object.keys(h).some((k) => k.toLowerCase() === 'content-length')) h['Content-Length'] = payload.length;
    if (expectContinue) h.Expect = '100-continue';
    let settled = false;
    let response = null;
    const parts = [];
    const finish = (extra) => {
      if (settled) return;
      settled = true;
      const out = { ms: Date.now() - t0, ...extra };
      if (response) {
        out.status = response.statusCode;
        out.headers = response.headers;
        out.text = Buffer.concat(parts).toString('utf8');
      }
      req.destroy();
      resolve(out);
    };
    const req = http.request({ host: '127.0.0.1', port, method, path: p, headers: h, agent: false });
    req.setTimeout(timeout, () => req.destroy(new Error(`no response within ${timeout} ms`)));
    req.on('response', (res) => {
      response = res;
      res.on('data', (d) => parts.push(d));
      res.on('end', () => finish({}));
      res.on('error', (e) => finish({ error: e }));
      res.on('close', () => finish({}));
    });
    req.on('error', (e) => {
      // A server may answer (413) and close while the body is still being
      // sent; keep the answer when it arrived.
      if (response) setTimeout(() => finish({ writeError: e }), 200);
      else finish({ error: e });
    });
    if (expectContinue) {
      req.flushHeaders();
      req.on('continue', () => req.end(payload));
    } else if (chunks) {
      for (const c of chunks) req.write(c);
      req.end();
    } else {
      req.end(payload);
    }
  });
}

// A raw HTTP/1.1 exchange for the over-size body without Expect: the
// headers go first and the body only when no answer came within `wait` ms,
// the way a careful client sends a body the server may refuse from its
// Content-Length alone.
function rawCall(port, { head, body, wait = 2000, timeout = 30000 }) {
  return new Promise((resolve) => {
    const t0 = Date.now();
    const s = net.connect(port, '127.0.0.1');
    const parts = [];
    let err = null;
    let done = false;
    const finish = () => {
      if (done) return;
      done = true;
      clearTimeout(timer);
      s.destroy();
      const raw = Buffer.concat(parts);
      const sep = raw.indexOf('\r\n\r\n');
      if (sep < 0) return resolve({ ms: Date.now() - t0, error: err || new Error(`incomplete response (${raw.length} bytes)`) });
      const lines = raw.subarray(0, sep).toString('latin1').split('\r\n');
      const m = /^HTTP\/1\.[01] (\d{3})/.exec(lines[0]);
      const headers = {};
      for (const l of lines.slice(1)) {
        const i = l.indexOf(':');
        if (i > 0) headers[l.slice(0, i).trim().toLowerCase()] = l.slice(i + 1).trim();
      }
      let rest = raw.subarray(sep + 4);
      if (headers['content-length'] !== undefined) rest = rest.subarray(0, Number(headers['content-length']));
      resolve({ ms: Date.now() - t0, status: m ? Number(m[1]) : undefined, headers, text: rest.toString('utf8'), error: m ? undefined : new Error(`bad status line ${lines[0]}`) });
    };
    const timer = setTimeout(finish, timeout);
    s.on('data', (d) => parts.push(d));
    s.on('error', (e) => (err = e));
    s.on('close', finish);
    s.write(head);
    setTimeout(() => {
      if (parts.length === 0 && !s.destroyed) s.write(body);
    }, wait);
  });
}

const describe = (res) => {
  if (!res) return 'no response';
  if (res.status === undefined) return `no response (${res.error?.code || res.error?.message})`;
  const ct = res.headers['content-type'] || '(none)';
  const text = (res.text || '').length > 700 ? `${res.text.slice(0, 700)}…` : res.text;
  return `got ${res.status} ${ct}: ${text}`;
};

// ---------------------------------------------------------------------------
// Validation against the spec

// The documented response for a route template (null: an unknown path),
// method and status, or null when the spec does not document it.
function documentedResponse(route, method, status) {
  if (route === null) return status === 404 ? spec.components.responses.NotFound : null;
  const item = spec.paths[route];
  if (!item) return null;
  const op = item[method.toLowerCase()];
  if (op) return op.responses[String(status)] || null;
  if (status === 405) for (const m of HTTP_METHODS) if (item[m]?.responses?.['405']) return item[m].responses['405'];
  return null;
}

// Validates one live response; prints one line.  Returns the parsed body
// (or the text for non-JSON media types), or undefined on failure.
function expectResponse(name, res, { route, method, status }) {
  if (res.status === 201 && onCreated) {
    try {
      onCreated(JSON.parse(res.text));
    } catch {
      /* judged below */
    }
  }
  const wanted = Array.isArray(status) ? status : [status];
  const problems = [];
  let body;
  if (res.status === undefined) {
    t.fail(name, describe(res));
    return undefined;
  }
  if (!wanted.includes(res.status)) problems.push(`status ${res.status}, expected ${wanted.join(' or ')}`);
  const doc = documentedResponse(route, method, res.status);
  if (!doc) {
    problems.push(`status ${res.status} is not documented for ${method} ${route ?? '(unknown path)'}`);
  } else {
    for (const [hname, h] of Object.entries(doc.headers || {})) {
      const v = res.headers[hname.toLowerCase()];
      if (v === undefined) {
        if (h.required) problems.push(`missing header ${hname}`);
        continue;
      }
      if (h.schema) {
        const vh = compile(h.schema);
        if (!vh(v)) problems.push(`header ${hname}: ${JSON.stringify(v)} ${formatAjvErrors(vh.errors)}`);
      }
    }
    const content = doc.content || {};
    const ct = res.headers['content-type'];
    if (Object.keys(content).length === 0) {
      if (res.text) problems.push(`undocumented body (${ct})`);
    } else {
      const key = matchMediaType(content, ct);
      if (!key) problems.push(`Content-Type ${JSON.stringify(ct)} is not one of ${Object.keys(content).join(', ')}`);
      else {
        const isJson = /\bjson\b|\+json/.test(key);
        if (isJson) {
          try {
            body = JSON.parse(res.text);
          } catch (e) {
            problems.push(`body is not JSON: ${e.message}`);
          }
        } else body = res.text;
        const schema = content[key].schema;
        if (body !== undefined && schema) {
          const v = compile(schema);
          if (!v(body)) problems.push(`body does not match the schema: ${formatAjvErrors(v.errors)}`);
        }
      }
    }
  }
  if (problems.length) {
    t.fail(name, `${problems.join('\n')}\n${describe(res)}`);
    return undefined;
  }
  t.ok(`${name}: ${res.status} ${res.headers['content-type'] || ''}`.trim());
  return body === undefined ? null : body;
}

// A problem response: documented status and schema, plus (optionally) the
// problem type and the JSON pointers of the faulty fields.
function expectProblem(name, res, { route, method, status, type, pointer }) {
  const body = expectResponse(name, res, { route, method, status });
  if (!body) return body;
  if (type) t.check(`${name}: type is ${type}`, body.type === `urn:swapspec:problem:${type}`, `type ${body.type}`);
  if (pointer !== undefined) {
    const pointers = (body.errors || []).map((e) => e.pointer);
    t.check(`${name}: errors name ${pointer}`, pointers.includes(pointer), `errors ${JSON.stringify(body.errors)}`);
  }
  return body;
}

// ---------------------------------------------------------------------------
// Prometheus text format 0.0.4 (checked here; the schema only says "string").

function parseMetrics(text) {
  const errors = [];
  const families = new Map();
  const typeOf = new Map();
  const familyOf = (name) => {
    for (const suf of ['_bucket', '_sum', '_count']) {
      const base = name.endsWith(suf) ? name.slice(0, -suf.length) : null;
      if (base && typeOf.get(base) === 'histogram') return base;
    }
    return name;
  };
  if (!text.endsWith('\n')) errors.push('the last line does not end with \\n');
  const seen = new Set();
  for (const line of text.split('\n')) {
    if (line === '') continue;
    let m;
    if ((m = /^# TYPE ([a-zA-Z_:][a-zA-Z0-9_:]*) (counter|gauge|histogram|summary|untyped)$/.exec(line))) {
      if (typeOf.has(m[1])) errors.push(`second TYPE line for ${m[1]}`);
      if (families.has(m[1])) errors.push(`TYPE of ${m[1]} after its samples`);
      typeOf.set(m[1], m[2]);
      continue;
    }
    if (/^# HELP [a-zA-Z_:][a-zA-Z0-9_:]* /.test(line) || line.startsWith('# ')) continue;
    m = /^([a-zA-Z_:][a-zA-Z0-9_:]*)(\{(.*)\})? (\S+)( -?\d+)?$/.exec(line);
    if (!m) {
      errors.push(`bad line: ${line}`);
      continue;
    }
    const labels = {};
    if (m[3]) {
      const re = /\s*([a-zA-Z_][a-zA-Z0-9_]*)="((?:[^"\\]|\\.)*)"\s*(,|$)/y;
      let pos = 0;
      while (pos < m[3].length) {
        re.lastIndex = pos;
        const l = re.exec(m[3]);
        if (!l) {
          errors.push(`bad labels: ${line}`);
          break;
        }
        labels[l[1]] = l[2].replace(/\\n/g, '\n').replace(/\\"/g, '"').replace(/\\\\/g, '\\');
        pos = re.lastIndex;
      }
    }
    const value = m[4] === '+Inf' ? Infinity : m[4] === '-Inf' ? -Infinity : Number(m[4]);
    if (Number.isNaN(value) && m[4] !== 'NaN') errors.push(`bad value: ${line}`);
    const key = `${m[1]}${JSON.stringify(Object.entries(labels).sort())}`;
    if (seen.has(key)) errors.push(`duplicate sample: ${line}`);
    seen.add(key);
    const fam = familyOf(m[1]);
    if (!families.has(fam)) families.set(fam, []);
    families.get(fam).push({ name: m[1], labels, value });
  }
  // Samples of one family must be contiguous: checked by re-walking.
  let last = null;
  const closed = new Set();
  for (const line of text.split('\n')) {
    const m = /^([a-zA-Z_:][a-zA-Z0-9_:]*)[{ ]/.exec(line);
    if (!m || line.startsWith('#')) continue;
    const fam = familyOf(m[1]);
    if (fam !== last) {
      if (closed.has(fam)) errors.push(`samples of ${fam} are not in one group`);
      if (last) closed.add(last);
      last = fam;
    }
  }
  return { families, typeOf, errors };
}

// ---------------------------------------------------------------------------
// Helpers

const comb2 = (n) => (n * (n - 1)) / 2;
const contentOf = (rows) => rows.reduce((s, len, i) => s + (len * (len - 1)) / 2 - i * len, 0);
const relClose = (a, b, tol) => Math.abs(a - b) <= tol * Math.max(1, Math.abs(b));
const sha256 = (s) => crypto.createHash('sha256').update(s).digest('hex');
const json = { 'Content-Type': 'application/json' };

function softwareVersion(bin) {
  const r = spawnSync(bin, ['--version'], { encoding: 'utf8', timeout: 10000 });
  const m = /^swapspec (\S+)/.exec(r.stdout || '');
  return m ? m[1] : null;
}

// A per-shot likelihood request that takes about a second on this machine
// (30 atoms, 3 levels, 3000 readings simulated by the binary itself), used
// to hold an Idempotency-Key in flight.
function slowAnalysisBody(bin) {
  const r = spawnSync(
    bin,
    ['simulate', '--levels', '3', '--atoms', '30', '--spectrum', '0.5,0.3,0.2', '--shots', '3000', '--seed', '5',
      '--calibration', path.join(REPO, 'samples', 'calibration-boxtrap-a.json')],
    { encoding: 'utf8', timeout: 60000, maxBuffer: 64 * 1024 * 1024 },
  );
  if (r.status !== 0) return null;
  const sim = JSON.parse(r.stdout);
  return {
    levels: 3,
    label: 'quillfeather/boxtrap-a/2026-12-02/long-run',
    calibration: TRAP_A,
    runs: [{ atoms: 30, energies: sim.energies.map((e) => Math.round(e * 1e4) / 1e4) }],
    method: 'likelihood',
  };
}

// ---------------------------------------------------------------------------
// Phase 1: no tokens file; every route, good and bad input.

async function phaseOpen(bin, version) {
  const dir = fs.mkdtempSync(path.join(os.tmpdir(), 'swapspec-api-'));
  const d = new Daemon(bin, 'open');
  try {
    await d.start(['--threads', '4'], dir);
    t.ok(`daemon listens on 127.0.0.1:${d.port} (store ${path.join(dir, 't.db')})`);
  } catch (e) {
    t.fail('daemon starts and prints its "listening" line', e.message);
    await d.stop();
    return;
  }
  const port = d.port;
  const go = async (o) => {
    const res = await call(port, o);
    if (res.status !== undefined) d.answered++;
    return res;
  };
  const created = new Map(); // id -> record
  onCreated = (rec) => rec && typeof rec.id === 'string' && created.set(rec.id, rec);
  let predictions200 = 0;

  // --- operations -------------------------------------------------------
  const health = expectResponse('GET /healthz', await go({ method: 'GET', path: '/healthz' }), { route: '/healthz', method: 'GET', status: 200 });
  if (health && version) t.check('GET /healthz: version is `swapspec --version`', health.version === version, `healthz ${health.version}, binary ${version}`);
  const m0 = expectResponse('GET /metrics (fresh)', await go({ method: 'GET', path: '/metrics' }), { route: '/metrics', method: 'GET', status: 200 });
  if (typeof m0 === 'string') {
    const { families } = parseMetrics(m0);
    const stored = families.get('swapspec_analyses_stored')?.[0]?.value;
    t.check('GET /metrics (fresh): swapspec_analyses_stored is 0', stored === 0, `value ${stored}`);
  }

  // --- predictions --------------------------------------------------------
  const predBody = { levels: 3, atoms: 24, spectrum: [0.1, 0.6, 0.3], top: 5, calibration: TRAP_A };
  let r = await go({ method: 'POST', path: '/v1/predictions', headers: json, body: predBody });
  let b = expectResponse('POST /v1/predictions (trap A, 24 atoms)', r, { route: '/v1/predictions', method: 'POST', status: 200 });
  if (r.status === 200) predictions200++;
  if (b) {
    t.check('predictions: echoes levels and atoms, spectrum sorted', b.levels === 3 && b.atoms === 24 && isDeepStrictEqual(b.spectrum, [0.6, 0.3, 0.1]), JSON.stringify({ levels: b.levels, atoms: b.atoms, spectrum: b.spectrum }));
    t.check('predictions: calibration from the request', b.calibration.source === 'request' && b.calibration.exchange === -3.1 && b.calibration.unit === 'Hz', JSON.stringify(b.calibration));
    t.check('predictions: top 5 diagrams listed', b.diagrams.length === 5, `${b.diagrams.length} listed`);
    // E[c] = C(n,2)·P2 with P2 = 0.36 + 0.09 + 0.01 = 0.46 (domain notes §2).
    t.check('predictions: mean_content = C(24,2)·P2 = 126.96 (exact identity, rel. 1e-9)', relClose(b.mean_content, comb2(24) * 0.46, 1e-9), `mean_content ${b.mean_content}`);
    const ptot = b.energy_levels.reduce((s, l) => s + l.probability, 0);
    t.check('predictions: energy level probabilities sum to 1 (abs. 1e-9)', Math.abs(ptot - 1) < 1e-9, `sum ${ptot}`);
    const energyOk = b.diagrams.every((g) => g.content === contentOf(g.diagram) && relClose(g.energy, TRAP_A.offset + TRAP_A.pair_shift * comb2(24) + TRAP_A.exchange * g.content, 1e-12));
    t.check('predictions: contents and energies follow c(λ) and the calibration formula (rel. 1e-12)', energyOk, JSON.stringify(b.diagrams));
  }
  r = await go({ method: 'POST', path: '/v1/predictions', headers: { 'Content-Type': 'application/json; charset=utf-8' }, body: { levels: 2, atoms: 3, spectrum: [0.5, 0.5] } });
  b = expectResponse('POST /v1/predictions (no calibration, Content-Type with charset=utf-8)', r, { route: '/v1/predictions', method: 'POST', status: 200 });
  if (r.status === 200) predictions200++;
  if (b) t.check('predictions: default calibration when none is given', b.calibration.source === 'default' && b.calibration.exchange === 1, JSON.stringify(b.calibration));

  // --- candidates ---------------------------------------------------------
  r = await go({ method: 'POST', path: '/v1/candidates', headers: json, body: { levels: 3, atoms: 6, content: 3 } });
  b = expectResponse('POST /v1/candidates (content 3)', r, { route: '/v1/candidates', method: 'POST', status: 200 });
  if (b) {
    // c(4,1,1) = 0+1+2+3−1−2 = 3 and c(3,3) = 0+1+2−1+0+1 = 3 (by hand).
    const got = b.diagrams.map((x) => JSON.stringify(x.diagram)).sort();
    t.check('candidates: content 3 of 6 atoms is (4,1,1) and (3,3), one degenerate group', isDeepStrictEqual(got, ['[3,3]', '[4,1,1]']) && b.degenerate_groups.length === 1, JSON.stringify(b.diagrams));
  }
  r = await go({ method: 'POST', path: '/v1/candidates', headers: json, body: { levels: 3, atoms: 6, energy: 30, calibration: TRAP_B } });
  b = expectResponse('POST /v1/candidates (30 Hz reading, trap B)', r, { route: '/v1/candidates', method: 'POST', status: 200 });
  if (b) {
    const sd = TRAP_B.noise_sd;
    const ok = b.energy_sd === sd && b.diagrams.every((x) => Math.abs(x.energy - 30) <= 3 * sd + 1e-9 && relClose(x.z, (x.energy - 30) / sd, 1e-9));
    t.check('candidates: every listed diagram is within 3 noise_sd of the reading, z = (E − 30)/σ', ok && b.count === b.diagrams.length, JSON.stringify(b));
  }
  // an empty selection carries a note (contents of 6 atoms on 3 levels run
  // from -3 to 15, by hand from c = Σ_i [λ_i(λ_i−1)/2 − (i−1)λ_i])
  r = await go({ method: 'POST', path: '/v1/candidates', headers: json, body: { levels: 3, atoms: 6, energy: 100, energy_sd: 0.1 } });
  b = expectResponse('POST /v1/candidates (reading outside every energy)', r, { route: '/v1/candidates', method: 'POST', status: 200 });
  if (b) {
    t.check('candidates: an empty selection says why, with the range of energies', b.count === 0 && typeof b.note === 'string' && b.note.includes('from -3 to 15 only'), JSON.stringify(b));
  }

  // --- simulations --------------------------------------------------------
  const cal0 = { offset: 1.5, pair_shift: 0.25, exchange: -2, noise_sd: 0, unit: 'Hz' };
  const simBody = { levels: 3, atoms: 10, spectrum: [0.5, 0.3, 0.2], shots: 200, seed: 42, calibration: cal0 };
  r = await go({ method: 'POST', path: '/v1/simulations', headers: json, body: simBody });
  b = expectResponse('POST /v1/simulations (200 shots, noiseless)', r, { route: '/v1/simulations', method: 'POST', status: 200 });
  if (b) {
    const shapes = b.diagrams.every((g) => g.reduce((s, x) => s + x, 0) === 10 && g.length <= 3 && g.every((x, i) => i === 0 || x <= g[i - 1]));
    t.check('simulations: 200 energies and 200 diagrams of 10 atoms on ≤ 3 rows', b.energies.length === 200 && b.diagrams.length === 200 && shapes && b.summary.shots === 200);
    const exact = b.energies.every((e, i) => relClose(e, cal0.offset + cal0.pair_shift * comb2(10) + cal0.exchange * contentOf(b.diagrams[i]), 1e-12));
    t.check('simulations: noiseless energies follow the calibration formula (rel. 1e-12)', exact);
    const mean = b.energies.reduce((s, x) => s + x, 0) / b.energies.length;
    t.check('simulations: summary mean is the mean of the energies (rel. 1e-9)', relClose(b.summary.mean_energy, mean, 1e-9), `${b.summary.mean_energy} vs ${mean}`);
    const again = await go({ method: 'POST', path: '/v1/simulations', headers: json, body: simBody });
    t.check('simulations: the same seed gives the same shots', again.status === 200 && isDeepStrictEqual(JSON.parse(again.text), b), describe(again));
  }
  expectProblem(
    'POST /v1/simulations shots 100001 → 422',
    await go({ method: 'POST', path: '/v1/simulations', headers: json, body: { ...simBody, shots: 100001 } }),
    { route: '/v1/simulations', method: 'POST', status: 422, pointer: '/shots' },
  );

  // --- analyses -----------------------------------------------------------
  const sample = JSON.parse(fs.readFileSync(path.join(REPO, 'samples', 'analysis-request.json'), 'utf8'));
  const before = Date.now();
  r = await go({ method: 'POST', path: '/v1/analyses', headers: json, body: sample });
  const after = Date.now();
  b = expectResponse('POST /v1/analyses (samples/analysis-request.json)', r, { route: '/v1/analyses', method: 'POST', status: 201 });
  if (b) {
    t.check('analyses: Location is /v1/analyses/{id} of the body', r.headers.location === `/v1/analyses/${b.id}`, `Location ${r.headers.location}, id ${b.id}`);
    const echoed = Object.entries(sample).every(([k, v]) => isDeepStrictEqual(b.request[k], v));
    t.check('analyses: request echoes every field of the body', echoed, JSON.stringify(b.request).slice(0, 400));
    t.check('analyses: label of the record is the request label', b.label === sample.label, `label ${JSON.stringify(b.label)}`);
    t.check('analyses: result is for 3 levels with a spectrum', b.result.levels === 3 && Array.isArray(b.result.spectrum?.values) && b.result.spectrum.values.length === 3);
    const ts = Date.parse(b.created_at);
    t.check('analyses: created_at is the time of the request (±5 s)', ts >= before - 5000 && ts <= after + 5000, `created_at ${b.created_at}`);
    if (version) t.check('analyses: software_version is `swapspec --version`', b.software_version === version, `${b.software_version} vs ${version}`);
    const g = await go({ method: 'GET', path: `/v1/analyses/${b.id}` });
    const gb = expectResponse('GET /v1/analyses/{id} (the stored analysis)', g, { route: '/v1/analyses/{id}', method: 'GET', status: 200 });
    if (gb) t.check('GET /v1/analyses/{id}: the same record as the 201', isDeepStrictEqual(gb, b), 'records differ');
  }
  // An analysis without a label and with method diagrams (no spectrum).
  const unlabeled = { levels: 2, runs: [{ atoms: 4, shots: 250, mean_energy: 4.968331, energy_variance: 45.569551 }], calibration: TRAP_A, method: 'diagrams' };
  r = await go({ method: 'POST', path: '/v1/analyses', headers: json, body: unlabeled });
  b = expectResponse('POST /v1/analyses (no label, method diagrams)', r, { route: '/v1/analyses', method: 'POST', status: 201 });

  // Idempotency.
  const key = `qf-${crypto.randomUUID()}`;
  const idemBody = { levels: 3, label: 'quillfeather/boxtrap-a/2026-12-02/retry', calibration: TRAP_A, runs: [{ atoms: 12, shots: 300, mean_energy: -18.209139, energy_variance: 755.944016 }], method: 'moments' };
  const idemText = JSON.stringify(idemBody);
  r = await go({ method: 'POST', path: '/v1/analyses', headers: { ...json, 'Idempotency-Key': key }, body: idemText });
  const first = expectResponse('POST /v1/analyses with Idempotency-Key (first)', r, { route: '/v1/analyses', method: 'POST', status: 201 });
  r = await go({ method: 'POST', path: '/v1/analyses', headers: { ...json, 'Idempotency-Key': key }, body: idemText });
  b = expectResponse('POST /v1/analyses same key, same body → 200 replay', r, { route: '/v1/analyses', method: 'POST', status: 200 });
  if (b && first) t.check('replay: the stored record, unchanged', isDeepStrictEqual(b, first), 'records differ');
  r = await go({ method: 'POST', path: '/v1/analyses', headers: { ...json, 'Idempotency-Key': `"${key}"` }, body: idemText });
  b = expectResponse('POST /v1/analyses same key in quotes (structured field) → 200 replay', r, { route: '/v1/analyses', method: 'POST', status: 200 });
  if (b && first) t.check('replay (quoted key): the same record', b.id === first.id, `id ${b.id} vs ${first.id}`);
  expectProblem(
    'POST /v1/analyses same key, different body → 422',
    await go({ method: 'POST', path: '/v1/analyses', headers: { ...json, 'Idempotency-Key': key }, body: { ...idemBody, confidence: 0.9 } }),
    { route: '/v1/analyses', method: 'POST', status: 422, type: 'idempotency-key-reused' },
  );
  expectProblem(
    'POST /v1/analyses Idempotency-Key of 129 characters → 400/422',
    await go({ method: 'POST', path: '/v1/analyses', headers: { ...json, 'Idempotency-Key': 'k'.repeat(129) }, body: idemText }),
    { route: '/v1/analyses', method: 'POST', status: [400, 422] },
  );

  // 409: the same key while the first request is still running.
  const slow = slowAnalysisBody(bin);
  if (!slow) t.skip('POST /v1/analyses same key while the first runs → 409', 'could not simulate the slow request body');
  else {
    const slowKey = `qf-${crypto.randomUUID()}`;
    const slowText = JSON.stringify(slow);
    const firstP = go({ method: 'POST', path: '/v1/analyses', headers: { ...json, 'Idempotency-Key': slowKey }, body: slowText, timeout: 120000 });
    let firstDone = false;
    firstP.then(() => (firstDone = true));
    await new Promise((res) => setTimeout(res, 300));
    const sentWhileRunning = !firstDone;
    const second = await go({ method: 'POST', path: '/v1/analyses', headers: { ...json, 'Idempotency-Key': slowKey }, body: slowText });
    const firstRes = await firstP;
    const fb = expectResponse('POST /v1/analyses slow request (holds the key)', firstRes, { route: '/v1/analyses', method: 'POST', status: 201 });
    if (!sentWhileRunning || (second.status === 200 && firstRes.ms < 400))
      t.skip('POST /v1/analyses same key while the first runs → 409', `the first request finished too fast (${firstRes.ms} ms)`);
    else expectProblem('POST /v1/analyses same key while the first runs → 409', second, { route: '/v1/analyses', method: 'POST', status: 409, type: 'conflict' });
  }

  // --- listing ------------------------------------------------------------
  r = await go({ method: 'GET', path: '/v1/analyses' });
  const list = expectResponse('GET /v1/analyses', r, { route: '/v1/analyses', method: 'GET', status: 200 });
  if (list) {
    const ids = list.items.map((x) => x.id);
    t.check(`list: holds each of the ${created.size} stored analyses exactly once`, ids.length === created.size && [...created.keys()].every((id) => ids.filter((x) => x === id).length === 1), `ids ${JSON.stringify(ids)}; created ${JSON.stringify([...created.keys()])}`);
    const ordered = list.items.every((x, i) => i === 0 || list.items[i - 1].created_at > x.created_at || (list.items[i - 1].created_at === x.created_at && list.items[i - 1].id > x.id));
    t.check('list: newest first (created_at desc, id desc)', ordered, JSON.stringify(list.items.map((x) => [x.created_at, x.id])));
    t.check('list: next_cursor is null when everything fits', list.next_cursor === null, `next_cursor ${list.next_cursor}`);
    const agree = list.items.every((x) => {
      const rec = created.get(x.id);
      if (!rec) return false;
      const values = rec.result.spectrum ? rec.result.spectrum.values : null;
      return x.levels === rec.result.levels && x.method === rec.result.method && x.label === rec.label && x.created_at === rec.created_at && isDeepStrictEqual(x.values, values) && isDeepStrictEqual(x.flags, rec.result.flags.map((f) => f.code));
    });
    t.check('list: each item agrees with its record (levels, method, label, values, flag codes)', agree, JSON.stringify(list.items).slice(0, 600));

    // Keyset pagination, one item per page.
    const walked = [];
    let cursor = null;
    let pages = 0;
    let pageOk = true;
    do {
      const q = `/v1/analyses?limit=1${cursor ? `&cursor=${encodeURIComponent(cursor)}` : ''}`;
      const pr = await go({ method: 'GET', path: q });
      const page = expectResponse(`GET ${q.length > 60 ? `${q.slice(0, 60)}…` : q}`, pr, { route: '/v1/analyses', method: 'GET', status: 200 });
      if (!page) {
        pageOk = false;
        break;
      }
      walked.push(...page.items.map((x) => x.id));
      cursor = page.next_cursor;
      pages++;
    } while (cursor && pages <= created.size + 1);
    if (pageOk) t.check('list: pages of 1 walk the same ids in the same order', isDeepStrictEqual(walked, ids), `walked ${JSON.stringify(walked)}`);

    const lab = sample.label;
    const lr = await go({ method: 'GET', path: `/v1/analyses?label=${encodeURIComponent(lab)}` });
    const lb = expectResponse('GET /v1/analyses?label=…', lr, { route: '/v1/analyses', method: 'GET', status: 200 });
    if (lb) t.check('list: label filter returns exactly the analyses with that label', lb.items.length === [...created.values()].filter((x) => x.label === lab).length && lb.items.every((x) => x.label === lab), JSON.stringify(lb.items.map((x) => x.label)));

    if (list.items.length >= 2) {
      const newest = list.items[0];
      const oldest = list.items[list.items.length - 1];
      const sr = await go({ method: 'GET', path: `/v1/analyses?since=${encodeURIComponent(oldest.created_at)}` });
      const sb = expectResponse('GET /v1/analyses?since=<oldest created_at>', sr, { route: '/v1/analyses', method: 'GET', status: 200 });
      if (sb) t.check('list: since is inclusive', sb.items.some((x) => x.id === oldest.id), JSON.stringify(sb.items.map((x) => x.id)));
      const ur = await go({ method: 'GET', path: `/v1/analyses?until=${encodeURIComponent(newest.created_at)}` });
      const ub = expectResponse('GET /v1/analyses?until=<newest created_at>', ur, { route: '/v1/analyses', method: 'GET', status: 200 });
      if (ub) t.check('list: until is exclusive', !ub.items.some((x) => x.created_at >= newest.created_at), JSON.stringify(ub.items.map((x) => x.created_at)));
    }
    const fr = await go({ method: 'GET', path: '/v1/analyses?since=2999-01-01T00:00:00Z' });
    const fb2 = expectResponse('GET /v1/analyses?since=2999-01-01T00:00:00Z', fr, { route: '/v1/analyses', method: 'GET', status: 200 });
    if (fb2) t.check('list: nothing since the year 2999', fb2.items.length === 0 && fb2.next_cursor === null);
  }
  for (const [q, why] of [
    ['limit=0', 'limit 0'],
    ['limit=201', 'limit 201'],
    ['limit=ten', 'limit not a number'],
    ['since=yesterday', 'since not RFC 3339'],
    ['cursor=%21%21not-a-cursor', 'a cursor the daemon never issued'],
  ])
    expectProblem(`GET /v1/analyses?${q} (${why}) → 400/422`, await go({ method: 'GET', path: `/v1/analyses?${q}` }), { route: '/v1/analyses', method: 'GET', status: [400, 422] });

  // --- not found, wrong method ------------------------------------------
  expectProblem('GET /v1/analyses/an_00000000000000000000 (unknown) → 404', await go({ method: 'GET', path: '/v1/analyses/an_00000000000000000000' }), { route: '/v1/analyses/{id}', method: 'GET', status: 404, type: 'not-found' });
  expectProblem('GET /v1/analyses/not-an-id → 404', await go({ method: 'GET', path: '/v1/analyses/not-an-id' }), { route: '/v1/analyses/{id}', method: 'GET', status: 404, type: 'not-found' });
  expectProblem('GET /v2/nothing (unknown path) → 404', await go({ method: 'GET', path: '/v2/nothing' }), { route: null, method: 'GET', status: 404, type: 'not-found' });
  expectProblem('POST /v1/predictions/extra (unknown path) → 404', await go({ method: 'POST', path: '/v1/predictions/extra', headers: json, body: predBody }), { route: null, method: 'POST', status: 404, type: 'not-found' });
  for (const [method, route, allow] of [
    ['GET', '/v1/predictions', ['POST']],
    ['DELETE', '/v1/candidates', ['POST']],
    ['PUT', '/v1/simulations', ['POST']],
    ['DELETE', '/v1/analyses', ['GET', 'POST']],
    ['PATCH', '/v1/analyses/an_00000000000000000000', ['GET']],
    ['POST', '/healthz', ['GET']],
    ['DELETE', '/metrics', ['GET']],
  ]) {
    const res = await go({ method, path: route, ...(method === 'GET' || method === 'DELETE' ? {} : { headers: json, body: '{}' }) });
    const tmpl = route.startsWith('/v1/analyses/') ? '/v1/analyses/{id}' : route;
    const pb = expectProblem(`${method} ${route} → 405`, res, { route: tmpl, method, status: 405, type: 'method-not-allowed' });
    if (pb !== undefined) {
      const got = (res.headers.allow || '').split(',').map((s) => s.trim()).filter(Boolean);
      t.check(`${method} ${route}: Allow lists ${allow.join(', ')} and not ${method}`, allow.every((a) => got.includes(a)) && !got.includes(method), `Allow: ${res.headers.allow}`);
    }
  }

  // --- malformed bodies (400) -------------------------------------------
  for (const [why, text] of [
    ['truncated JSON', '{"levels": 3, "atoms": 6, "spectrum": [0.6, 0.3'],
    ['not JSON at all', 'levels=3&atoms=6'],
    ['empty body', ''],
    ['a JSON array, not an object', '[3, 6]'],
    ['duplicate key', '{"levels": 3, "levels": 4, "atoms": 6, "spectrum": [0.6, 0.3, 0.1]}'],
    ['NaN literal', '{"levels": 3, "atoms": 6, "spectrum": [NaN, 0.3, 0.1]}'],
    ['Infinity literal', '{"levels": 3, "atoms": 6, "spectrum": [Infinity, 0.3, 0.1]}'],
    ['1e400', '{"levels": 3, "atoms": 6, "spectrum": [1e400, 0.3, 0.1]}'],
    ['invalid UTF-8', Buffer.concat([Buffer.from('{"levels": 3, "atoms": 6, "spectrum": [0.6, 0.3, 0.1], "calibration": {"offset": 0, "pair_shift": 0, "exchange": 1, "noise_sd": 0, "unit": "'), Buffer.from([0xff, 0xfe]), Buffer.from('"}}')])],
  ])
    expectProblem(`POST /v1/predictions ${why} → 400`, await go({ method: 'POST', path: '/v1/predictions', headers: json, body: text }), { route: '/v1/predictions', method: 'POST', status: 400, type: 'malformed-input' });
  expectProblem('POST /v1/analyses truncated JSON → 400', await go({ method: 'POST', path: '/v1/analyses', headers: json, body: '{"levels": 3, "runs": [' }), { route: '/v1/analyses', method: 'POST', status: 400, type: 'malformed-input' });

  // --- content type (415) -----------------------------------------------
  for (const [why, headers] of [
    ['text/plain', { 'Content-Type': 'text/plain' }],
    ['no Content-Type', {}],
    ['application/x-www-form-urlencoded', { 'Content-Type': 'application/x-www-form-urlencoded' }],
  ])
    expectProblem(`POST /v1/predictions ${why} → 415`, await go({ method: 'POST', path: '/v1/predictions', headers, body: JSON.stringify(predBody) }), { route: '/v1/predictions', method: 'POST', status: 415, type: 'unsupported-media-type' });
  expectProblem('POST /v1/analyses text/plain → 415', await go({ method: 'POST', path: '/v1/analyses', headers: { 'Content-Type': 'text/plain' }, body: JSON.stringify(sample) }), { route: '/v1/analyses', method: 'POST', status: 415, type: 'unsupported-media-type' });

  // --- invalid fields (422, with JSON pointers) ---------------------------
  const bad = [
    ['/v1/predictions', 'unknown field', { ...predBody, bogus: 1 }, '/bogus'],
    ['/v1/predictions', 'levels 100', { ...predBody, levels: 100 }, '/levels'],
    ['/v1/predictions', 'levels as a string', { ...predBody, levels: '3' }, '/levels'],
    ['/v1/predictions', 'levels 3.5', { ...predBody, levels: 3.5 }, '/levels'],
    ['/v1/predictions', 'top −1', { ...predBody, top: -1 }, '/top'],
    ['/v1/candidates', 'content 2.5', { levels: 3, atoms: 6, content: 2.5 }, '/content'],
    ['/v1/predictions', 'atoms 10^9', { ...predBody, atoms: 1e9 }, '/atoms'],
    ['/v1/predictions', 'spectrum summing to 1.1', { ...predBody, spectrum: [0.7, 0.3, 0.1] }, '/spectrum'],
    ['/v1/predictions', 'calibration exchange 0', { ...predBody, calibration: { ...TRAP_A, exchange: 0 } }, '/calibration/exchange'],
    ['/v1/predictions', 'unknown calibration field', { ...predBody, calibration: { ...TRAP_A, gain: 2 } }, '/calibration/gain'],
    ['/v1/candidates', 'content and energy together', { levels: 3, atoms: 6, content: 3, energy: 3 }, undefined],
    ['/v1/simulations', 'missing shots', { levels: 3, atoms: 6, spectrum: [0.6, 0.3, 0.1] }, '/shots'],
    ['/v1/analyses', 'negative variance in runs[2]', { ...idemBody, runs: [...idemBody.runs, idemBody.runs[0], { atoms: 12, shots: 300, mean_energy: -18.2, energy_variance: -1 }] }, '/runs/2/energy_variance'],
    ['/v1/analyses', 'run mixing energies and shots', { ...idemBody, runs: [{ atoms: 8, shots: 3, energies: [1, 2, 3] }] }, '/runs/0/shots'],
    ['/v1/analyses', 'unknown field', { ...idemBody, operator: 'Odile' }, '/operator'],
    ['/v1/analyses', 'confidence 1', { ...idemBody, confidence: 1 }, '/confidence'],
    ['/v1/analyses', 'method "best"', { ...idemBody, method: 'best' }, '/method'],
  ];
  for (const [route, why, body, pointer] of bad)
    expectProblem(`POST ${route} ${why} → 422`, await go({ method: 'POST', path: route, headers: json, body }), { route, method: 'POST', status: 422, type: 'invalid-argument', pointer });

  // --- size limit (413) ---------------------------------------------------
  const big = JSON.stringify({ ...idemBody, label: 'x'.repeat(BODY_LIMIT + 1024) });
  expectProblem('POST /v1/analyses over 1 MiB with Expect: 100-continue → 413', await go({ method: 'POST', path: '/v1/analyses', headers: json, body: big, expectContinue: true }), { route: '/v1/analyses', method: 'POST', status: 413, type: 'content-too-large' });
  const bigBuf = Buffer.from(big);
  const head = Buffer.from(`POST /v1/analyses HTTP/1.1\r\nHost: 127.0.0.1:${port}\r\nContent-Type: application/json\r\nContent-Length: ${bigBuf.length}\r\nConnection: close\r\n\r\n`);
  const rawRes = await rawCall(port, { head, body: bigBuf });
  if (rawRes.status !== undefined) d.answered++;
  expectProblem('POST /v1/analyses over 1 MiB (Content-Length, no Expect) → 413', rawRes, { route: '/v1/analyses', method: 'POST', status: 413, type: 'content-too-large' });
  const pieces = [];
  for (let i = 0; i < big.length; i += 65536) pieces.push(big.slice(i, i + 65536));
  expectProblem('POST /v1/predictions over 1 MiB, chunked → 413', await go({ method: 'POST', path: '/v1/predictions', headers: json, chunks: pieces }), { route: '/v1/predictions', method: 'POST', status: 413, type: 'content-too-large' });

  // --- still serving, and the metrics count what happened ----------------
  expectResponse('GET /healthz after the bad requests', await go({ method: 'GET', path: '/healthz' }), { route: '/healthz', method: 'GET', status: 200 });
  r = await go({ method: 'POST', path: '/v1/predictions', headers: json, body: predBody });
  expectResponse('POST /v1/predictions after the bad requests', r, { route: '/v1/predictions', method: 'POST', status: 200 });
  if (r.status === 200) predictions200++;
  await new Promise((res) => setTimeout(res, 200));
  r = await go({ method: 'GET', path: '/metrics' });
  const mt = expectResponse('GET /metrics', r, { route: '/metrics', method: 'GET', status: 200 });
  if (typeof mt === 'string') {
    const { families, typeOf, errors } = parseMetrics(mt);
    t.check('metrics: valid text exposition 0.0.4', errors.length === 0, errors.slice(0, 8).join('\n'));
    for (const [name, type] of [
      ['swapspec_http_requests_total', 'counter'],
      ['swapspec_http_request_duration_seconds', 'histogram'],
      ['swapspec_analyses_stored', 'gauge'],
      ['swapspec_store_errors_total', 'counter'],
    ])
      t.check(`metrics: ${name} is a ${type} with samples`, typeOf.get(name) === type && (families.get(name) || []).length > 0, `TYPE ${typeOf.get(name)}`);
    const stored = families.get('swapspec_analyses_stored')?.[0]?.value;
    t.check(`metrics: swapspec_analyses_stored is ${created.size}`, stored === created.size, `value ${stored}`);
    const reqs = families.get('swapspec_http_requests_total') || [];
    const p200 = reqs.find((s) => s.labels.route === '/v1/predictions' && s.labels.status === '200')?.value;
    t.check(`metrics: requests_total{route="/v1/predictions",status="200"} counts ${predictions200}`, p200 >= predictions200, `value ${p200}`);
    const a201 = reqs.find((s) => s.labels.route === '/v1/analyses' && s.labels.status === '201')?.value;
    t.check(`metrics: requests_total{route="/v1/analyses",status="201"} counts ${created.size}`, a201 >= created.size, `value ${a201}`);
    const idLabels = [...families.values()].flat().filter((s) => Object.values(s.labels).some((v) => /an_[0-9a-f]{20}/.test(v)));
    t.check('metrics: no label carries an analysis id', idLabels.length === 0, JSON.stringify(idLabels.slice(0, 3)));
    const hist = families.get('swapspec_http_request_duration_seconds') || [];
    const routes = new Set(hist.map((s) => s.labels.route));
    const histProblems = [];
    for (const route of routes) {
      const buckets = hist.filter((s) => s.name.endsWith('_bucket') && s.labels.route === route).map((s) => ({ le: s.labels.le === '+Inf' ? Infinity : Number(s.labels.le), v: s.value }));
      const count = hist.find((s) => s.name.endsWith('_count') && s.labels.route === route)?.value;
      const sum = hist.find((s) => s.name.endsWith('_sum') && s.labels.route === route);
      const sorted = [...buckets].sort((a, b2) => a.le - b2.le);
      if (!isDeepStrictEqual(sorted, buckets)) histProblems.push(`${route}: buckets not in increasing le`);
      if (!sorted.every((x, i) => i === 0 || x.v >= sorted[i - 1].v)) histProblems.push(`${route}: buckets not cumulative`);
      const inf = sorted.find((x) => x.le === Infinity);
      if (!inf || inf.v !== count) histProblems.push(`${route}: +Inf bucket ${inf?.v} != _count ${count}`);
      if (!sum) histProblems.push(`${route}: no _sum`);
    }
    t.check('metrics: histogram buckets cumulative, +Inf = _count, _sum present', routes.size > 0 && histProblems.length === 0, histProblems.join('\n'));
  }

  onCreated = null;
  await stopAndCheck(d, 'open');
  checkLogLines(d, []);
  fs.rmSync(dir, { recursive: true, force: true });
}

// ---------------------------------------------------------------------------
// Phase 1b: named calibrations, analyses by reference, revisions and
// reprocessing jobs (issue 5), on a daemon of their own.

// Polls GET /v1/jobs/{id} until the job is done or failed (30 s at most).
async function waitForJob(go, id) {
  const until = Date.now() + 30000;
  for (;;) {
    const res = await go({ method: 'GET', path: `/v1/jobs/${id}` });
    let body = null;
    try {
      body = JSON.parse(res.text);
    } catch {
      /* judged by the caller */
    }
    if (!body || body.state === 'done' || body.state === 'failed' || Date.now() > until) return res;
    await new Promise((r) => setTimeout(r, 100));
  }
}

async function phaseCalibrations(bin) {
  const dir = fs.mkdtempSync(path.join(os.tmpdir(), 'swapspec-api-cal-'));
  const d = new Daemon(bin, 'calibrations');
  try {
    await d.start(['--threads', '4'], dir);
    t.ok(`calibrations: daemon listens on 127.0.0.1:${d.port}`);
  } catch (e) {
    t.fail('calibrations: daemon starts', e.message);
    await d.stop();
    return;
  }
  const go = async (o) => {
    const res = await call(d.port, o);
    if (res.status !== undefined) d.answered++;
    return res;
  };
  const calRoute = '/v1/calibrations/{name}';
  let r = await go({ method: 'GET', path: '/v1/calibrations' });
  let b = expectResponse('GET /v1/calibrations (none yet)', r, { route: '/v1/calibrations', method: 'GET', status: 200 });
  if (b) t.check('calibrations: the list starts empty', b.items.length === 0, JSON.stringify(b));

  // Two versions of trap A: v1 from Monday, v2 (offset +0.31 Hz) from Friday.
  const v1Body = { ...TRAP_A, valid_from: '2026-11-23T00:00:00Z', note: 'weekly calibration, Monday' };
  r = await go({ method: 'PUT', path: '/v1/calibrations/boxtrap-a', headers: json, body: v1Body });
  const v1 = expectResponse('PUT /v1/calibrations/boxtrap-a (version 1)', r, { route: calRoute, method: 'PUT', status: 201 });
  if (v1) {
    t.check('calibrations: the first PUT is version 1 at Location ?version=1', v1.version === 1 && r.headers.location === '/v1/calibrations/boxtrap-a?version=1', `version ${v1.version}, Location ${r.headers.location}`);
    t.check('calibrations: the version echoes the body (numbers, note, valid_from in the record form)', v1.offset === TRAP_A.offset && v1.exchange === TRAP_A.exchange && v1.unit === 'Hz' && v1.note === v1Body.note && v1.valid_from === '2026-11-23T00:00:00.000Z' && v1.coupling_spread === 0, JSON.stringify(v1));
  }
  const delta = 0.31;
  const v2Body = { ...TRAP_A, offset: TRAP_A.offset + delta, valid_from: '2026-11-27T00:00:00+00:00' };
  r = await go({ method: 'PUT', path: '/v1/calibrations/boxtrap-a', headers: json, body: v2Body });
  const v2 = expectResponse('PUT /v1/calibrations/boxtrap-a (version 2)', r, { route: calRoute, method: 'PUT', status: 201 });
  if (v2) t.check('calibrations: the second PUT is version 2 with an empty note', v2.version === 2 && v2.note === '', JSON.stringify(v2));
  r = await go({ method: 'GET', path: '/v1/calibrations/boxtrap-a' });
  b = expectResponse('GET /v1/calibrations/boxtrap-a (latest)', r, { route: calRoute, method: 'GET', status: 200 });
  if (b && v2) t.check('calibrations: GET gives the latest version', isDeepStrictEqual(b, v2), JSON.stringify(b));
  r = await go({ method: 'GET', path: '/v1/calibrations/boxtrap-a?version=1' });
  b = expectResponse('GET /v1/calibrations/boxtrap-a?version=1', r, { route: calRoute, method: 'GET', status: 200 });
  if (b && v1) t.check('calibrations: version 1 is unchanged after version 2', isDeepStrictEqual(b, v1), JSON.stringify(b));
  expectProblem('GET /v1/calibrations/boxtrap-a?version=3 → 404', await go({ method: 'GET', path: '/v1/calibrations/boxtrap-a?version=3' }), { route: calRoute, method: 'GET', status: 404, type: 'not-found' });
  expectProblem('GET /v1/calibrations/boxtrap-a?version=0 → 422', await go({ method: 'GET', path: '/v1/calibrations/boxtrap-a?version=0' }), { route: calRoute, method: 'GET', status: 422, type: 'invalid-argument', pointer: '/version' });
  expectProblem('GET /v1/calibrations/boxtrap-z → 404', await go({ method: 'GET', path: '/v1/calibrations/boxtrap-z' }), { route: calRoute, method: 'GET', status: 404, type: 'not-found' });
  const badPuts = [
    ['exchange 0', '/v1/calibrations/boxtrap-a', { ...TRAP_A, exchange: 0 }, '/exchange'],
    ['negative noise_sd', '/v1/calibrations/boxtrap-a', { ...TRAP_A, noise_sd: -0.1 }, '/noise_sd'],
    ['missing offset', '/v1/calibrations/boxtrap-a', { pair_shift: 0.8, exchange: -3.1, noise_sd: 0.6 }, '/offset'],
    ['unknown field', '/v1/calibrations/boxtrap-a', { ...TRAP_A, gain: 2 }, '/gain'],
    ['valid_from not RFC 3339', '/v1/calibrations/boxtrap-a', { ...TRAP_A, valid_from: 'last Monday' }, '/valid_from'],
    ['note of 501 bytes', '/v1/calibrations/boxtrap-a', { ...TRAP_A, note: 'n'.repeat(501) }, '/note'],
    ['name with capitals', '/v1/calibrations/Boxtrap-A', TRAP_A, '/name'],
    ['name of 65 characters', `/v1/calibrations/${'a'.repeat(65)}`, TRAP_A, '/name'],
  ];
  for (const [why, p, body, pointer] of badPuts)
    expectProblem(`PUT ${p.length > 40 ? `${p.slice(0, 40)}…` : p} ${why} → 422`, await go({ method: 'PUT', path: p, headers: json, body }), { route: calRoute, method: 'PUT', status: 422, type: 'invalid-argument', pointer });
  expectProblem('PUT /v1/calibrations/boxtrap-a malformed JSON → 400', await go({ method: 'PUT', path: '/v1/calibrations/boxtrap-a', headers: json, body: '{"offset": 1,' }), { route: calRoute, method: 'PUT', status: 400, type: 'malformed-input' });
  expectProblem('PUT /v1/calibrations/boxtrap-a text/plain → 415', await go({ method: 'PUT', path: '/v1/calibrations/boxtrap-a', headers: { 'Content-Type': 'text/plain' }, body: JSON.stringify(TRAP_A) }), { route: calRoute, method: 'PUT', status: 415, type: 'unsupported-media-type' });
  r = await go({ method: 'GET', path: '/v1/calibrations/boxtrap-a?version=3' });
  t.check('calibrations: refused PUTs stored no version', r.status === 404, describe(r));

  // Analyses by reference.  One summary run of 4 atoms on 3 levels: two
  // observations (mean, variance) for two unknowns (P2, P3), so the fit
  // reads P2 from the mean exactly: E = offset + V·C(n,2) + J·C(n,2)·P2
  // (domain notes §2).  (With 2 levels P3 follows from P2 and the variance
  // pulls on P2 too.)  p = (0.6, 0.3, 0.1): P2 = 0.46, P3 = 0.244.
  const n = 4;
  const N = comb2(n);
  const P2 = 0.46;
  const P3 = 0.244;
  const varC = N * (1 + 2 * (n - 2) * P3 + comb2(n - 2) * P2 * P2) - N * N * P2 * P2;
  const mean = TRAP_A.offset + TRAP_A.pair_shift * N + TRAP_A.exchange * N * P2;
  const variance = TRAP_A.exchange ** 2 * varC + TRAP_A.noise_sd ** 2;
  const byRef = (measuredAt, extra = {}) => ({
    levels: 3,
    label: 'quillfeather/boxtrap-a/by-reference',
    calibration: { ref: 'boxtrap-a', ...extra },
    measured_at: measuredAt,
    runs: [{ atoms: n, shots: 400, mean_energy: mean, energy_variance: variance }],
    method: 'moments',
  });
  const p2Of = (cal) => (mean - cal.offset - cal.pair_shift * N) / (cal.exchange * N);
  r = await go({ method: 'POST', path: '/v1/analyses', headers: json, body: byRef('2026-11-25T14:00:00+01:00') });
  const tue = expectResponse('POST /v1/analyses by reference, measured Tuesday', r, { route: '/v1/analyses', method: 'POST', status: 201 });
  if (tue) {
    const c = tue.result.calibration;
    t.check('by reference: Tuesday resolves to version 1 (source ref, name, version, valid_from)', c.source === 'ref' && c.name === 'boxtrap-a' && c.version === 1 && c.offset === TRAP_A.offset && c.valid_from === '2026-11-23T00:00:00.000Z', JSON.stringify(c));
    t.check('by reference: revision 1 of 1', tue.revision === 1 && tue.revision_count === 1, `${tue.revision}/${tue.revision_count}`);
    t.check('by reference: P2 = (E − offset − V·C(n,2)) / (J·C(n,2)) with version 1 (rel. 1e-9)', relClose(tue.result.power_sums.p2.value, p2Of(TRAP_A), 1e-9), `p2 ${tue.result.power_sums.p2.value}`);
  }
  r = await go({ method: 'POST', path: '/v1/analyses', headers: json, body: byRef('2026-11-28T09:30:00Z') });
  const sat = expectResponse('POST /v1/analyses by reference, measured Saturday', r, { route: '/v1/analyses', method: 'POST', status: 201 });
  if (sat) t.check('by reference: Saturday resolves to version 2', sat.result.calibration.version === 2, JSON.stringify(sat.result.calibration));
  r = await go({ method: 'POST', path: '/v1/analyses', headers: json, body: { ...byRef('2026-11-25T14:00:00Z', { version: 2 }) } });
  const pinned = expectResponse('POST /v1/analyses by reference, version 2 pinned', r, { route: '/v1/analyses', method: 'POST', status: 201 });
  if (pinned) t.check('by reference: a pinned version wins over the time', pinned.result.calibration.version === 2, JSON.stringify(pinned.result.calibration));
  const badRefs = [
    ['measured before any version', byRef('2026-11-20T00:00:00Z'), '/calibration/ref'],
    ['an unknown name', { ...byRef('2026-11-25T00:00:00Z'), calibration: { ref: 'boxtrap-q' } }, '/calibration/ref'],
    ['a name with capitals', { ...byRef('2026-11-25T00:00:00Z'), calibration: { ref: 'BoxTrap' } }, '/calibration/ref'],
    ['a version that does not exist', byRef('2026-11-25T00:00:00Z', { version: 9 }), '/calibration/version'],
    ['ref mixed with numbers', byRef('2026-11-25T00:00:00Z', { offset: 1 }), '/calibration/offset'],
    ['measured_at not RFC 3339', byRef('Tuesday'), '/measured_at'],
  ];
  for (const [why, body, pointer] of badRefs)
    expectProblem(`POST /v1/analyses by reference, ${why} → 422`, await go({ method: 'POST', path: '/v1/analyses', headers: json, body }), { route: '/v1/analyses', method: 'POST', status: 422, type: 'invalid-argument', pointer });

  // Version 3 (offset +2δ) valid from Monday noon: Tuesday's analysis now
  // falls under it; Saturday's stays with version 2.
  const v3Cal = { ...TRAP_A, offset: TRAP_A.offset + 2 * delta };
  r = await go({ method: 'PUT', path: '/v1/calibrations/boxtrap-a', headers: json, body: { ...v3Cal, valid_from: '2026-11-23T12:00:00Z', note: 'Monday re-measured' } });
  expectResponse('PUT /v1/calibrations/boxtrap-a (version 3, valid from Monday noon)', r, { route: calRoute, method: 'PUT', status: 201 });
  r = await go({ method: 'GET', path: '/v1/calibrations' });
  b = expectResponse('GET /v1/calibrations', r, { route: '/v1/calibrations', method: 'GET', status: 200 });
  if (b) t.check('calibrations: one name with 3 versions', b.items.length === 1 && b.items[0].name === 'boxtrap-a' && b.items[0].latest_version === 3 && b.items[0].count === 3 && b.items[0].valid_from === '2026-11-23T12:00:00.000Z', JSON.stringify(b));

  r = await go({ method: 'POST', path: '/v1/reprocessing', headers: json, body: { calibration: 'boxtrap-a' } });
  const job = expectResponse('POST /v1/reprocessing (boxtrap-a, versions by time)', r, { route: '/v1/reprocessing', method: 'POST', status: 202 });
  if (job) {
    t.check('reprocessing: Location is /v1/jobs/{id} of the body; 3 analyses selected', r.headers.location === `/v1/jobs/${job.id}` && job.total === 3, `Location ${r.headers.location}, total ${job.total}`);
    r = await waitForJob(go, job.id);
    b = expectResponse('GET /v1/jobs/{id} (finished)', r, { route: '/v1/jobs/{id}', method: 'GET', status: 200 });
    // Without a version every analysis takes the version valid at its time
    // (the pinned one too): Tuesday's two move to version 3, Saturday's
    // stays on version 2.
    if (b) t.check('reprocessing: done; both Tuesday analyses revised, Saturday unchanged', b.state === 'done' && b.done === 3 && b.revised === 2 && b.unchanged === 1 && b.failed === 0 && b.started_at && b.finished_at, JSON.stringify(b));
  }
  if (tue) {
    r = await go({ method: 'GET', path: `/v1/analyses/${tue.id}` });
    b = expectResponse('GET /v1/analyses/{id} after reprocessing (revision 2)', r, { route: '/v1/analyses/{id}', method: 'GET', status: 200 });
    if (b) {
      t.check('revisions: the record shows revision 2 of 2 with its job and version 3', b.revision === 2 && b.revision_count === 2 && job && b.job_id === job.id && b.result.calibration.version === 3 && typeof b.revised_at === 'string', JSON.stringify({ revision: b.revision, count: b.revision_count, job: b.job_id, cal: b.result.calibration }));
      // Offset +Δ shifts P2 by −Δ/(J·C(n,2)) (the mean-energy identity above).
      const shift = b.result.power_sums.p2.value - tue.result.power_sums.p2.value;
      const want = -(2 * delta) / (TRAP_A.exchange * N);
      t.check(`revisions: P2 moved by −Δ/(J·C(n,2)) = ${want.toFixed(6)} (rel. 1e-9)`, relClose(shift, want, 1e-9), `shift ${shift}`);
      t.check('revisions: request and created_at are the original ones', isDeepStrictEqual(b.request, tue.request) && b.created_at === tue.created_at);
    }
    r = await go({ method: 'GET', path: `/v1/analyses/${tue.id}?revision=1` });
    b = expectResponse('GET /v1/analyses/{id}?revision=1', r, { route: '/v1/analyses/{id}', method: 'GET', status: 200 });
    if (b) t.check('revisions: revision 1 is the record as first stored (result unchanged)', isDeepStrictEqual(b.result, tue.result) && b.revision === 1 && b.revision_count === 2, JSON.stringify({ revision: b.revision, count: b.revision_count }));
    expectProblem('GET /v1/analyses/{id}?revision=3 → 404', await go({ method: 'GET', path: `/v1/analyses/${tue.id}?revision=3` }), { route: '/v1/analyses/{id}', method: 'GET', status: 404, type: 'not-found' });
    expectProblem('GET /v1/analyses/{id}?revision=two → 422', await go({ method: 'GET', path: `/v1/analyses/${tue.id}?revision=two` }), { route: '/v1/analyses/{id}', method: 'GET', status: 422, type: 'invalid-argument', pointer: '/revision' });
    r = await go({ method: 'GET', path: `/v1/analyses/${tue.id}/revisions` });
    b = expectResponse('GET /v1/analyses/{id}/revisions', r, { route: '/v1/analyses/{id}/revisions', method: 'GET', status: 200 });
    if (b) t.check('revisions: two, oldest first, versions 1 then 3, the first without a job', b.id === tue.id && b.revisions.length === 2 && b.revisions[0].revision === 1 && b.revisions[0].job_id === null && b.revisions[0].calibration.version === 1 && b.revisions[1].calibration.version === 3 && job && b.revisions[1].job_id === job.id && isDeepStrictEqual(b.revisions[0].result, tue.result), JSON.stringify(b.revisions.map((x) => [x.revision, x.calibration, x.job_id])));
  }
  expectProblem('GET /v1/analyses/{id}/revisions of an unknown id → 404', await go({ method: 'GET', path: '/v1/analyses/an_00000000000000000000/revisions' }), { route: '/v1/analyses/{id}/revisions', method: 'GET', status: 404, type: 'not-found' });

  // Running the same job again writes nothing.
  r = await go({ method: 'POST', path: '/v1/reprocessing', headers: json, body: { calibration: 'boxtrap-a' } });
  const again = expectResponse('POST /v1/reprocessing again', r, { route: '/v1/reprocessing', method: 'POST', status: 202 });
  if (again) {
    b = JSON.parse((await waitForJob(go, again.id)).text || 'null');
    t.check('reprocessing: the second run finds everything unchanged', b && b.state === 'done' && b.unchanged === 3 && b.revised === 0, JSON.stringify(b));
  }
  // A pinned version for one label, by the creation window.
  r = await go({ method: 'POST', path: '/v1/reprocessing', headers: json, body: { calibration: 'boxtrap-a', version: 1, label: 'quillfeather/boxtrap-a/by-reference', since: '2000-01-01T00:00:00Z', until: '2999-01-01T00:00:00Z' } });
  const pin = expectResponse('POST /v1/reprocessing with version, label, since and until', r, { route: '/v1/reprocessing', method: 'POST', status: 202 });
  if (pin) {
    b = JSON.parse((await waitForJob(go, pin.id)).text || 'null');
    t.check('reprocessing: version 1 for all: Tuesday (now on 3), Saturday and the pinned one revised', b && b.state === 'done' && b.revised === 3 && b.parameters.version === 1 && b.parameters.since === '2000-01-01T00:00:00.000Z', JSON.stringify(b));
  }
  const badJobs = [
    ['an unknown calibration', { calibration: 'boxtrap-q' }, '/calibration'],
    ['no calibration', { version: 1 }, '/calibration'],
    ['a version that does not exist', { calibration: 'boxtrap-a', version: 4 }, '/version'],
    ['version 0', { calibration: 'boxtrap-a', version: 0 }, '/version'],
    ['since not RFC 3339', { calibration: 'boxtrap-a', since: 'last week' }, '/since'],
    ['an unknown field', { calibration: 'boxtrap-a', dry_run: true }, '/dry_run'],
  ];
  for (const [why, body, pointer] of badJobs)
    expectProblem(`POST /v1/reprocessing with ${why} → 422`, await go({ method: 'POST', path: '/v1/reprocessing', headers: json, body }), { route: '/v1/reprocessing', method: 'POST', status: 422, type: 'invalid-argument', pointer });
  expectProblem('POST /v1/reprocessing malformed JSON → 400', await go({ method: 'POST', path: '/v1/reprocessing', headers: json, body: '{"calibration":' }), { route: '/v1/reprocessing', method: 'POST', status: 400, type: 'malformed-input' });
  expectProblem('GET /v1/jobs/{id} unknown → 404', await go({ method: 'GET', path: '/v1/jobs/job_00000000000000000000' }), { route: '/v1/jobs/{id}', method: 'GET', status: 404, type: 'not-found' });
  expectProblem('DELETE /v1/calibrations/boxtrap-a → 405', await go({ method: 'DELETE', path: '/v1/calibrations/boxtrap-a' }), { route: calRoute, method: 'DELETE', status: 405, type: 'method-not-allowed' });

  await stopAndCheck(d, 'calibrations');
  checkLogLines(d, []);
  fs.rmSync(dir, { recursive: true, force: true });
}

// ---------------------------------------------------------------------------
// Phase 2: a tokens file; 401 and 403.

async function phaseTokens(bin) {
  const dir = fs.mkdtempSync(path.join(os.tmpdir(), 'swapspec-api-tok-'));
  const tok = { read: `rd-${crypto.randomBytes(16).toString('hex')}`, write: `wr-${crypto.randomBytes(16).toString('hex')}`, admin: `ad-${crypto.randomBytes(16).toString('hex')}` };
  const file = path.join(dir, 'tokens');
  fs.writeFileSync(file, `# Quillfeather lab tokens (test)\nread ${sha256(tok.read)}\nwrite ${sha256(tok.write)}\nadmin ${sha256(tok.admin)}\n`, { mode: 0o600 });
  const d = new Daemon(bin, 'tokens');
  try {
    await d.start(['--tokens', file], dir);
    t.ok(`daemon with a tokens file listens on 127.0.0.1:${d.port}`);
  } catch (e) {
    t.fail('daemon with a tokens file starts', e.message);
    await d.stop();
    return;
  }
  const go = async (o) => {
    const res = await call(d.port, o);
    if (res.status !== undefined) d.answered++;
    return res;
  };
  const auth = (x) => ({ Authorization: `Bearer ${x}` });
  const body = { levels: 3, atoms: 6, spectrum: [0.6, 0.3, 0.1] };

  expectResponse('tokens: GET /healthz without a token', await go({ method: 'GET', path: '/healthz' }), { route: '/healthz', method: 'GET', status: 200 });
  expectResponse('tokens: GET /metrics without a token', await go({ method: 'GET', path: '/metrics' }), { route: '/metrics', method: 'GET', status: 200 });
  expectProblem('tokens: POST /v1/predictions without a token → 401', await go({ method: 'POST', path: '/v1/predictions', headers: json, body }), { route: '/v1/predictions', method: 'POST', status: 401, type: 'unauthorized' });
  expectProblem('tokens: POST /v1/predictions with an unknown token → 401', await go({ method: 'POST', path: '/v1/predictions', headers: { ...json, ...auth('not-a-token') }, body }), { route: '/v1/predictions', method: 'POST', status: 401, type: 'unauthorized' });
  expectProblem('tokens: POST /v1/predictions with Basic credentials → 401', await go({ method: 'POST', path: '/v1/predictions', headers: { ...json, Authorization: `Basic ${Buffer.from(`odile:${tok.write}`).toString('base64')}` }, body }), { route: '/v1/predictions', method: 'POST', status: 401, type: 'unauthorized' });
  expectProblem('tokens: POST /v1/predictions with a read token → 403', await go({ method: 'POST', path: '/v1/predictions', headers: { ...json, ...auth(tok.read) }, body }), { route: '/v1/predictions', method: 'POST', status: 403, type: 'forbidden' });
  expectResponse('tokens: POST /v1/predictions with a write token', await go({ method: 'POST', path: '/v1/predictions', headers: { ...json, ...auth(tok.write) }, body }), { route: '/v1/predictions', method: 'POST', status: 200 });
  expectResponse('tokens: POST /v1/predictions with an admin token', await go({ method: 'POST', path: '/v1/predictions', headers: { ...json, ...auth(tok.admin) }, body }), { route: '/v1/predictions', method: 'POST', status: 200 });
  // RFC 9110 §11.1: the auth scheme is case-insensitive.
  expectResponse('tokens: scheme "bearer" in lower case', await go({ method: 'POST', path: '/v1/predictions', headers: { ...json, Authorization: `bearer ${tok.write}` }, body }), { route: '/v1/predictions', method: 'POST', status: 200 });
  expectProblem('tokens: GET /v1/analyses without a token → 401', await go({ method: 'GET', path: '/v1/analyses' }), { route: '/v1/analyses', method: 'GET', status: 401, type: 'unauthorized' });
  expectResponse('tokens: GET /v1/analyses with a read token', await go({ method: 'GET', path: '/v1/analyses', headers: auth(tok.read) }), { route: '/v1/analyses', method: 'GET', status: 200 });
  expectResponse('tokens: GET /v1/analyses with an admin token', await go({ method: 'GET', path: '/v1/analyses', headers: auth(tok.admin) }), { route: '/v1/analyses', method: 'GET', status: 200 });
  expectProblem('tokens: GET /v1/analyses/{id} without a token → 401', await go({ method: 'GET', path: '/v1/analyses/an_00000000000000000000' }), { route: '/v1/analyses/{id}', method: 'GET', status: 401, type: 'unauthorized' });
  // Calibrations and reprocessing: only admin may write.
  const calPath = '/v1/calibrations/boxtrap-b';
  const calRoute = '/v1/calibrations/{name}';
  expectProblem('tokens: PUT /v1/calibrations/{name} without a token → 401', await go({ method: 'PUT', path: calPath, headers: json, body: TRAP_B }), { route: calRoute, method: 'PUT', status: 401, type: 'unauthorized' });
  expectProblem('tokens: PUT /v1/calibrations/{name} with a read token → 403', await go({ method: 'PUT', path: calPath, headers: { ...json, ...auth(tok.read) }, body: TRAP_B }), { route: calRoute, method: 'PUT', status: 403, type: 'forbidden' });
  expectProblem('tokens: PUT /v1/calibrations/{name} with a write token → 403', await go({ method: 'PUT', path: calPath, headers: { ...json, ...auth(tok.write) }, body: TRAP_B }), { route: calRoute, method: 'PUT', status: 403, type: 'forbidden' });
  expectResponse('tokens: PUT /v1/calibrations/{name} with an admin token', await go({ method: 'PUT', path: calPath, headers: { ...json, ...auth(tok.admin) }, body: TRAP_B }), { route: calRoute, method: 'PUT', status: 201 });
  expectResponse('tokens: GET /v1/calibrations/{name} with a read token', await go({ method: 'GET', path: calPath, headers: auth(tok.read) }), { route: calRoute, method: 'GET', status: 200 });
  expectProblem('tokens: GET /v1/calibrations without a token → 401', await go({ method: 'GET', path: '/v1/calibrations' }), { route: '/v1/calibrations', method: 'GET', status: 401, type: 'unauthorized' });
  expectResponse('tokens: GET /v1/calibrations with a read token', await go({ method: 'GET', path: '/v1/calibrations', headers: auth(tok.read) }), { route: '/v1/calibrations', method: 'GET', status: 200 });
  const jobBody = { calibration: 'boxtrap-b' };
  expectProblem('tokens: POST /v1/reprocessing with a write token → 403', await go({ method: 'POST', path: '/v1/reprocessing', headers: { ...json, ...auth(tok.write) }, body: jobBody }), { route: '/v1/reprocessing', method: 'POST', status: 403, type: 'forbidden' });
  const jr = await go({ method: 'POST', path: '/v1/reprocessing', headers: { ...json, ...auth(tok.admin) }, body: jobBody });
  const jb = expectResponse('tokens: POST /v1/reprocessing with an admin token', jr, { route: '/v1/reprocessing', method: 'POST', status: 202 });
  if (jb) expectResponse('tokens: GET /v1/jobs/{id} with a read token', await go({ method: 'GET', path: `/v1/jobs/${jb.id}`, headers: auth(tok.read) }), { route: '/v1/jobs/{id}', method: 'GET', status: 200 });
  expectProblem('tokens: GET /v1/jobs/{id} without a token → 401', await go({ method: 'GET', path: '/v1/jobs/job_00000000000000000000' }), { route: '/v1/jobs/{id}', method: 'GET', status: 401, type: 'unauthorized' });
  expectProblem('tokens: POST /v1/analyses with a read token → 403', await go({ method: 'POST', path: '/v1/analyses', headers: { ...json, ...auth(tok.read) }, body: { levels: 2, runs: [{ atoms: 4, shots: 250, mean_energy: 4.97, energy_variance: 45.6 }], calibration: TRAP_A } }), { route: '/v1/analyses', method: 'POST', status: 403, type: 'forbidden' });

  await stopAndCheck(d, 'tokens');
  checkLogLines(d, Object.values(tok));
  fs.rmSync(dir, { recursive: true, force: true });
}

// Phase 3: without a tokens file the daemon must refuse a non-loopback
// address.  It binds nothing reachable from elsewhere when it behaves; when
// it does start, it is stopped at once (no traffic is sent to it).
async function phaseRefuseWide(bin) {
  const dir = fs.mkdtempSync(path.join(os.tmpdir(), 'swapspec-api-wide-'));
  const env = { ...process.env };
  for (const k of Object.keys(env)) if (k.startsWith('SWAPSPEC_')) delete env[k];
  const r = spawnSync(bin, ['serve', '--listen', '0.0.0.0:0', '--data', path.join(dir, 't.db')], { encoding: 'utf8', timeout: 5000, env, killSignal: 'SIGTERM' });
  const refused = r.status !== null && r.status !== 0 && !r.error;
  t.check('serve --listen 0.0.0.0:0 without tokens is refused (non-zero exit, message on stderr)', refused && r.stderr.trim().length > 0, r.error ? `still running after 5 s (${r.error.code}); stopped` : `exit ${r.status}, stderr ${r.stderr.slice(0, 300)}`);
  fs.rmSync(dir, { recursive: true, force: true });
}

async function stopAndCheck(d, name) {
  const x = await d.stop();
  t.check(`${name}: SIGTERM → exit 0 within 10 s`, x && x.code === 0 && x.signal === null && x.ms <= 10000, JSON.stringify(x));
}

// The issue asks for one JSON log line per request on stderr, never a token.
function checkLogLines(d, secrets) {
  const notJson = d.logLines.filter((l) => {
    if (l.trim() === '') return false;
    try {
      const j = JSON.parse(l);
      return j === null || typeof j !== 'object' || Array.isArray(j);
    } catch {
      return true;
    }
  });
  t.check(`${d.name}: every stderr line is a JSON object (${d.logLines.length} lines)`, notJson.length === 0, notJson.slice(0, 3).join('\n'));
  const requestLines = d.logLines.filter((l) => {
    try {
      const j = JSON.parse(l);
      return j && typeof j === 'object' && 'status' in j && 'method' in j;
    } catch {
      return false;
    }
  });
  t.check(`${d.name}: one request log line per answered request (${d.answered})`, requestLines.length === d.answered, `${requestLines.length} lines with method and status`);
  if (secrets.length) {
    const leaks = d.logLines.filter((l) => secrets.some((s) => l.includes(s) || l.includes(sha256(s))));
    t.check(`${d.name}: no log line carries a token or its digest`, leaks.length === 0, leaks.slice(0, 2).join('\n'));
  }
}

async function main() {
  const binArg = process.argv[2];
  if (!binArg) {
    t.fail('usage', 'node validate_live.mjs path/to/swapspec');
    return;
  }
  const bin = path.resolve(binArg);
  spec = await SwaggerParser.dereference(SPEC_PATH);
  compile = makeValidatorCache(makeAjv());
  const version = softwareVersion(bin);
  t.check('`swapspec --version` prints a version', version !== null);
  await phaseOpen(bin, version);
  await phaseCalibrations(bin);
  await phaseTokens(bin);
  await phaseRefuseWide(bin);
}

main()
  .catch((e) => t.fail('validate_live crashed', e.stack || e.message))
  .finally(() => process.exit(t.finish()));
