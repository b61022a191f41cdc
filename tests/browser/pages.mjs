// pages.mjs — the daemon's HTML pages and SVG figures in a real browser.
//
// Starts `swapspec serve` on a free loopback port with a store in a fresh
// temporary directory (no tokens file: the loopback mode in which the pages
// need no token), stores a few analyses of the Quillfeather lab through the
// JSON API (a summary run and a per-shot run with d = 3, an underdetermined
// d = 4 run, a degenerate d = 3 run with n = 6, a hostile label, and one
// analysis reprocessed with a second calibration version), then opens the
// list page and every analysis page in Debian's headless Chromium, driven
// by playwright-core, and checks:
//  - the figures render (inline <svg> with a non-empty box and a <title>;
//    each figure route as a document of its own and as an <img> with
//    naturalWidth > 0, the way a dashboard embeds it);
//  - the numbers of the spectrum table equal GET /v1/analyses/{id} to the
//    rounding the page states (half a unit in its last decimal), with
//    "n/a" exactly where the JSON has null; flags, runs, calibration and
//    confidence level as in the JSON;
//  - the list page lists what GET /v1/analyses lists, in the same order, and
//    its filter form and next-page link give the same pages as the API;
//  - a label with markup shows as text;
//  - no console message of type error, no page error, no failed request, no
//    response >= 400 in the browser, no <script> anywhere, and the pages
//    still draw their figures with JavaScript switched off.
// Screenshots of every page and figure are written to the artefacts folder.
//
// Usage: node pages.mjs path/to/swapspec path/to/artefacts-dir
// Prints one line per check and "N passed, N failed"; exit status 1 when a
// check failed.
import { spawn } from 'node:child_process';
import crypto from 'node:crypto';
import fs from 'node:fs';
import os from 'node:os';
import path from 'node:path';
import { chromium } from 'playwright-core';

const CHROMIUM = process.env.SWAPSPEC_CHROMIUM || '/usr/bin/chromium';

class Tally {
  constructor() {
    this.passed = 0;
    this.failed = 0;
  }
  check(name, cond, detail) {
    if (cond) {
      this.passed++;
      console.log(`ok   ${name}`);
    } else {
      this.failed++;
      const d = typeof detail === 'function' ? detail() : detail;
      console.log(`FAIL ${name}${d ? `\n     ${String(d).replace(/\n/g, '\n     ')}` : ''}`);
    }
    return !!cond;
  }
  finish() {
    console.log(`${this.passed} passed, ${this.failed} failed`);
    return this.failed === 0 && this.passed > 0 ? 0 : 1;
  }
}
const t = new Tally();

// --- the daemon --------------------------------------------------------------
function startDaemon(bin, dir, extra = []) {
  const env = { ...process.env };
  for (const k of Object.keys(env)) if (k.startsWith('SWAPSPEC_')) delete env[k];
  const child = spawn(bin, ['serve', '--listen', '127.0.0.1:0', '--data', path.join(dir, 'pages.db'), '--threads', '4', ...extra], {
    stdio: ['ignore', 'ignore', 'pipe'],
    env,
  });
  const lines = [];
  return new Promise((resolve, reject) => {
    const timer = setTimeout(() => reject(new Error(`no "listening" line within 20 s:\n${lines.join('\n')}`)), 20000);
    let buf = '';
    child.stderr.on('data', (chunk) => {
      buf += chunk;
      let i;
      while ((i = buf.indexOf('\n')) >= 0) {
        const line = buf.slice(0, i);
        buf = buf.slice(i + 1);
        lines.push(line);
        try {
          const j = JSON.parse(line);
          if (j.event === 'listening' && Number.isInteger(j.port) && j.port > 0) {
            clearTimeout(timer);
            resolve({ child, port: j.port, lines });
          }
        } catch {
          /* not a JSON line */
        }
      }
    });
    child.on('exit', (code) => {
      clearTimeout(timer);
      reject(new Error(`the daemon exited (${code}) before listening:\n${lines.join('\n')}`));
    });
  });
}

let BASE = '';
async function api(method, p, body) {
  const res = await fetch(BASE + p, {
    method,
    headers: body === undefined ? {} : { 'Content-Type': 'application/json' },
    body: body === undefined ? undefined : JSON.stringify(body),
  });
  const text = await res.text();
  let json = null;
  try {
    json = JSON.parse(text);
  } catch {
    /* not JSON */
  }
  return { status: res.status, type: res.headers.get('content-type') || '', json, text };
}

async function must(method, p, body, want) {
  const r = await api(method, p, body);
  if (!want.includes(r.status)) throw new Error(`${method} ${p} → ${r.status}: ${r.text.slice(0, 400)}`);
  return r.json;
}

// --- the lab's analyses ---------------------------------------------------------
// Trap A of the Quillfeather lab (samples/README.md), an invented setting.
const TRAP_A = { offset: 12.5, pair_shift: 0.8, exchange: -3.1, noise_sd: 0.6, unit: 'Hz' };
// A noisier trap with a positive coupling, made up for this test.
const TRAP_W = { offset: 4.0, pair_shift: 0.5, exchange: 2.2, noise_sd: 1.2, unit: 'Hz' };

async function simulate(levels, atoms, spectrum, shots, seed, calibration) {
  return must('POST', '/v1/simulations', { levels, atoms, spectrum, shots, seed, calibration }, [200]);
}

async function store(body) {
  const doc = await must('POST', '/v1/analyses', body, [201]);
  return doc.id;
}

async function makeAnalyses() {
  const made = [];
  const s1 = await simulate(3, 8, [0.55, 0.3, 0.15], 400, 2611231, TRAP_A);
  made.push({
    slug: 'summary-d3',
    id: await store({
      levels: 3,
      label: 'trapA web run 1 (summary)',
      calibration: TRAP_A,
      runs: [{ atoms: 8, shots: s1.summary.shots, mean_energy: s1.summary.mean_energy, energy_variance: s1.summary.energy_variance }],
    }),
  });
  const s2 = await simulate(3, 5, [0.55, 0.3, 0.15], 300, 2611232, TRAP_A);
  made.push({
    slug: 'per-shot-d3',
    id: await store({ levels: 3, label: 'trapA web run 2 (per shot)', calibration: TRAP_A, runs: [{ atoms: 5, energies: s2.energies }] }),
  });
  const s3 = await simulate(4, 6, [0.4, 0.3, 0.2, 0.1], 600, 2611233, TRAP_A);
  made.push({
    slug: 'underdetermined-d4',
    id: await store({
      levels: 4,
      label: 'trapC web run 3 (d = 4)',
      calibration: TRAP_A,
      runs: [{ atoms: 6, shots: s3.summary.shots, mean_energy: s3.summary.mean_energy, energy_variance: s3.summary.energy_variance }],
    }),
    expectFlag: 'underdetermined',
  });
  const s4 = await simulate(3, 6, [0.7, 0.2, 0.1], 300, 2611234, TRAP_W);
  made.push({
    slug: 'degenerate-d3',
    id: await store({ levels: 3, label: 'trapW web run 4 (n = 6)', calibration: TRAP_W, runs: [{ atoms: 6, energies: s4.energies }] }),
    expectFlag: 'degenerate-energy',
  });
  made.push({
    slug: 'hostile-label',
    id: await store({
      levels: 3,
      label: `<b>Odile's "best" run</b> & <script>x</script>`,
      calibration: TRAP_A,
      runs: [{ atoms: 8, shots: s1.summary.shots, mean_energy: s1.summary.mean_energy, energy_variance: s1.summary.energy_variance }],
    }),
  });
  // a calibration by reference, then a second version and a reprocessing
  // job that adds revision 2
  const v1 = { ...TRAP_A, valid_from: '2026-11-01T00:00:00Z', note: 'web test, first measurement' };
  const v2 = { ...TRAP_A, offset: 16.8, valid_from: '2026-11-25T00:00:00Z', note: 'web test, offset re-measured' };
  await must('PUT', '/v1/calibrations/web-trap-a', v1, [200, 201]);
  const s5 = await simulate(3, 7, [0.55, 0.3, 0.15], 300, 2611235, { ...TRAP_A, offset: v2.offset });
  const revId = await store({
    levels: 3,
    label: 'trapA web run 5 (reprocessed)',
    measured_at: '2026-11-20T10:00:00Z',
    calibration: { ref: 'web-trap-a' },
    runs: [{ atoms: 7, energies: s5.energies }],
  });
  await must('PUT', '/v1/calibrations/web-trap-a', v2, [200, 201]);
  const job = await must('POST', '/v1/reprocessing', { calibration: 'web-trap-a', version: 2 }, [200, 201, 202]);
  let state = job.state;
  for (let i = 0; i < 100 && state !== 'done' && state !== 'failed'; i++) {
    await new Promise((r) => setTimeout(r, 200));
    state = (await must('GET', `/v1/jobs/${job.id}`, undefined, [200])).state;
  }
  t.check(`reprocessing job ${job.id} finished`, state === 'done', `state ${state}`);
  made.push({ slug: 'reprocessed', id: revId, revisions: 2 });
  return made;
}

// --- helpers in the page ------------------------------------------------------
// The spectrum table as {headers: [...], rows: [[name, cells...]]}.
async function spectrumTable(page) {
  return page.evaluate(() => {
    const table = document.querySelector('#spectrum-table');
    if (!table) return null;
    const headers = [...table.querySelectorAll('thead th')].map((x) => x.textContent.trim());
    const rows = [...table.querySelectorAll('tbody tr')].map((tr) => [...tr.children].map((c) => c.textContent.trim()));
    return { headers, rows };
  });
}

async function figureBoxes(page) {
  return page.evaluate(() =>
    [...document.querySelectorAll('main svg.figure')].map((svg) => {
      const r = svg.getBoundingClientRect();
      const title = svg.querySelector(':scope > title');
      return { id: svg.id, w: r.width, h: r.height, title: title ? title.textContent : '', children: svg.childElementCount };
    }),
  );
}

// |shown − exact| <= half a unit of the last shown decimal (+ 1e-9 for the
// binary representation of the decimal text)
function agrees(cell, value, decimals) {
  if (value === null || value === undefined) return cell === 'n/a';
  if (!new RegExp(`^-?\\d+\\.\\d{${decimals}}$`).test(cell)) return false;
  return Math.abs(Number(cell) - value) <= 0.5 * 10 ** -decimals + 1e-9;
}

function slugFile(dir, name) {
  return path.join(dir, `${name.replace(/[^a-z0-9-]+/gi, '-')}.png`);
}

// --- the checks ---------------------------------------------------------------
async function checkAnalysisPage(page, a, artefacts) {
  const doc = await must('GET', `/v1/analyses/${a.id}`, undefined, [200]);
  const result = doc.result;
  const where = `${a.slug} (${a.id})`;
  if (a.expectFlag)
    t.check(`fixture ${where}: the JSON carries the ${a.expectFlag} flag`, result.flags.some((f) => f.code === a.expectFlag), JSON.stringify(result.flags.map((f) => f.code)));
  const resp = await page.goto(`${BASE}/analyses/${a.id}`, { waitUntil: 'load' });
  t.check(`${where}: page 200 text/html`, resp.status() === 200 && /^text\/html/.test(resp.headers()['content-type'] || ''), `${resp.status()} ${resp.headers()['content-type']}`);
  const info = await page.evaluate(() => ({
    h1: document.querySelector('h1')?.textContent,
    scripts: document.querySelectorAll('script').length,
    injected: document.querySelectorAll('main h1 b, main td b').length,
    text: document.body.innerText,
  }));
  t.check(`${where}: the heading is the label as text`, info.h1 === (doc.label || doc.id), `${JSON.stringify(info.h1)} vs ${JSON.stringify(doc.label)}`);
  t.check(`${where}: no script, no markup from the label`, info.scripts === 0 && info.injected === 0, `${info.scripts} scripts, ${info.injected} injected`);

  // figures
  const boxes = await figureBoxes(page);
  const wantFigures = a.revisions > 1 ? 4 : 3;
  t.check(`${where}: ${wantFigures} inline figures`, boxes.length === wantFigures, JSON.stringify(boxes.map((b) => b.id)));
  for (const b of boxes)
    t.check(`${where}: figure ${b.id} renders (${Math.round(b.w)}x${Math.round(b.h)} px) with a title`, b.w > 300 && b.h > 100 && b.title.length > 10 && b.children > 5, JSON.stringify(b));

  // the spectrum table against the JSON, to the stated rounding
  const m = /rounded to (\d+) decimals/.exec(info.text);
  t.check(`${where}: the page states its rounding`, m !== null);
  const decimals = m ? Number(m[1]) : 4;
  t.check(`${where}: the page calls the spectrum a statistical estimate at ${result.confidence * 100} %`,
    /statistical estimate/.test(info.text) && info.text.includes(`${Number((result.confidence * 100).toPrecision(4))} % confidence level`));
  const table = await spectrumTable(page);
  if (t.check(`${where}: spectrum table present`, table !== null && table.rows.length === result.levels, JSON.stringify(table))) {
    const sp = result.spectrum;
    const columns = {
      Estimate: (i) => sp.values[i],
      'Standard error': (i) => sp.stderr[i],
      Lower: (i) => sp.lower[i],
      Upper: (i) => sp.upper[i],
      'Feasible from': (i) => result.feasible_ranges[i][0],
      'Feasible to': (i) => result.feasible_ranges[i][1],
      'Naive λ/n': (i) => result.naive.spectrum[i],
    };
    const want = ['Estimate', 'Standard error', 'Lower', 'Upper'];
    if (result.feasible_ranges) want.push('Feasible from', 'Feasible to');
    if (result.naive) want.push('Naive λ/n');
    t.check(`${where}: table columns ${want.join(', ')}`, JSON.stringify(table.headers.slice(1)) === JSON.stringify(want), JSON.stringify(table.headers));
    const bad = [];
    let compared = 0;
    table.rows.forEach((row, i) => {
      table.headers.slice(1).forEach((h, k) => {
        const f = columns[h];
        if (!f) return;
        compared++;
        if (!agrees(row[k + 1], f(i), decimals)) bad.push(`p${i + 1} ${h}: shown ${row[k + 1]}, JSON ${f(i)}`);
      });
    });
    t.check(`${where}: ${compared} numbers of the table equal the JSON to ${decimals} decimals`, bad.length === 0 && compared >= 4 * result.levels, bad.join('\n'));
  }
  if (result.purity) {
    const pm = /Purity P₂ = tr ρ² = (\S+) ± (\S+)/.exec(info.text);
    t.check(`${where}: purity as in the JSON`, pm && agrees(pm[1], result.purity.value, decimals) && agrees(pm[2], result.purity.stderr, decimals), pm ? pm[0] : 'no purity line');
  }

  // flags, runs, calibration
  const codes = await page.evaluate(() => [...document.querySelectorAll('.flag')].map((f) => f.dataset.code));
  t.check(`${where}: flags ${JSON.stringify(result.flags.map((f) => f.code))} shown`, JSON.stringify(codes) === JSON.stringify(result.flags.map((f) => f.code)), JSON.stringify(codes));
  const runs = await page.evaluate(() => [...document.querySelectorAll('#runs-table tbody tr')].map((tr) => [...tr.children].map((c) => c.textContent.trim())));
  t.check(`${where}: runs table (atoms, shots) as in the JSON`,
    runs.length === result.runs.length && runs.every((r, k) => Number(r[1]) === result.runs[k].atoms && Number(r[2]) === result.runs[k].shots), JSON.stringify(runs));
  const cal = result.calibration;
  const calText = cal.source === 'ref' ? `${cal.name}, version ${cal.version}` : cal.source === 'request' ? 'inline' : 'default';
  t.check(`${where}: calibration shown as "${calText}"`, info.text.includes(calText));
  if (a.revisions) {
    t.check(`${where}: JSON has ${a.revisions} revisions`, doc.revision_count === a.revisions, `revision_count ${doc.revision_count}`);
    const revRows = await page.evaluate(() => document.querySelectorAll('#revisions-table tbody tr').length);
    t.check(`${where}: revisions table lists ${a.revisions}`, revRows === a.revisions, `${revRows} rows`);
    const revs = await must('GET', `/v1/analyses/${a.id}/revisions`, undefined, [200]);
    const versions = revs.revisions.map((r) => (r.calibration ? `${r.calibration.name} v${r.calibration.version}` : 'inline'));
    const figText = await page.evaluate(() => document.querySelector('#fig-revisions')?.textContent || '');
    t.check(`${where}: revisions figure names ${versions.join(', ')}`, versions.every((v) => figText.includes(v)), figText.slice(0, 300));
  }
  await page.screenshot({ path: slugFile(artefacts, `analysis-${a.slug}`), fullPage: true });
}

async function checkFigureRoutes(page, a, artefacts) {
  const names = ['readings', 'spectrum', 'diagrams'];
  if (a.revisions) names.push('revisions');
  for (const name of names) {
    const url = `${BASE}/v1/analyses/${a.id}/figures/${name}.svg`;
    const resp = await page.goto(url, { waitUntil: 'load' });
    const info = await page.evaluate(() => {
      const root = document.documentElement;
      const r = root.getBoundingClientRect();
      return { tag: root.localName, ns: root.namespaceURI, w: r.width, h: r.height, title: root.querySelector('title')?.textContent || '', desc: root.querySelector('desc')?.textContent || '' };
    });
    t.check(`${a.slug}: ${name}.svg is image/svg+xml and renders as an SVG document with title and desc`,
      resp.status() === 200 && resp.headers()['content-type'] === 'image/svg+xml' && info.tag === 'svg' && info.ns === 'http://www.w3.org/2000/svg' && info.w > 300 && info.h > 100 && info.title && info.desc,
      JSON.stringify({ status: resp.status(), type: resp.headers()['content-type'], ...info }));
    await page.screenshot({ path: slugFile(artefacts, `figure-${a.slug}-${name}`) });
  }
  // as a dashboard embeds them: a page on the daemon's origin (what a
  // dashboard proxy in front of the daemon gives), fulfilled by the test
  const dashboard = `${BASE}/__dashboard-under-test`;
  await page.route(dashboard, (route) =>
    route.fulfill({
      contentType: 'text/html; charset=utf-8',
      body: `<!DOCTYPE html><title>dashboard</title><link rel="icon" href="data:,">${names
        .map((n) => `<img alt="${n}" src="/v1/analyses/${a.id}/figures/${n}.svg">`)
        .join('')}`,
    }),
  );
  await page.goto(dashboard, { waitUntil: 'load' });
  await page.unroute(dashboard);
  const imgs = await page.evaluate(() => [...document.images].map((i) => ({ alt: i.alt, ok: i.complete, w: i.naturalWidth, h: i.naturalHeight })));
  t.check(`${a.slug}: every figure loads as <img> (naturalWidth > 0)`, imgs.length === names.length && imgs.every((i) => i.ok && i.w > 0 && i.h > 0), JSON.stringify(imgs));
  const unknown = await api('GET', `/v1/analyses/${a.id}/figures/histogram.svg`);
  t.check(`${a.slug}: unknown figure → 404 problem document`, unknown.status === 404 && /application\/problem\+json/.test(unknown.type) && unknown.json?.status === 404, `${unknown.status} ${unknown.type}`);
}

async function listRows(page) {
  return page.evaluate(() =>
    [...document.querySelectorAll('#analyses-table tbody tr')].map((tr) => {
      const a = tr.querySelector('a');
      return { href: a.getAttribute('href'), text: a.textContent, injected: tr.querySelectorAll('b, script').length };
    }),
  );
}

async function checkListPage(page, made, artefacts) {
  const all = await must('GET', '/v1/analyses?limit=200', undefined, [200]);
  const resp = await page.goto(`${BASE}/`, { waitUntil: 'load' });
  t.check('list: GET / 200 text/html', resp.status() === 200 && /^text\/html/.test(resp.headers()['content-type'] || ''));
  let rows = await listRows(page);
  t.check(`list: ${all.items.length} analyses, newest first as GET /v1/analyses`,
    JSON.stringify(rows.map((r) => r.href)) === JSON.stringify(all.items.map((i) => `analyses/${i.id}`)),
    `${JSON.stringify(rows.map((r) => r.href))}\nvs ${JSON.stringify(all.items.map((i) => i.id))}`);
  const hostile = all.items.find((i) => i.label.startsWith('<b>'));
  const hostileRow = rows.find((r) => hostile && r.href === `analyses/${hostile.id}`);
  t.check('list: a label with markup is shown as text', hostileRow && hostileRow.text === hostile.label && hostileRow.injected === 0, JSON.stringify(hostileRow));
  await page.screenshot({ path: slugFile(artefacts, 'list'), fullPage: true });

  // the filter form: label
  const target = all.items.find((i) => i.label === 'trapA web run 2 (per shot)');
  await page.fill('input[name=label]', target.label);
  await Promise.all([page.waitForNavigation({ waitUntil: 'load' }), page.click('button[type=submit]')]);
  rows = await listRows(page);
  t.check('list: the label filter keeps exactly that analysis', rows.length === 1 && rows[0].href === `analyses/${target.id}`, `${page.url()} ${JSON.stringify(rows)}`);
  // dates: since today (UTC) keeps all, until today keeps none (exclusive)
  const today = all.items[0].created_at.slice(0, 10);
  await page.goto(`${BASE}/`, { waitUntil: 'load' });
  await page.fill('input[name=since]', today);
  await Promise.all([page.waitForNavigation({ waitUntil: 'load' }), page.click('button[type=submit]')]);
  rows = await listRows(page);
  const since = await must('GET', `/v1/analyses?limit=200&since=${today}T00:00:00Z`, undefined, [200]);
  t.check(`list: since ${today} lists what the API lists (${since.items.length})`, rows.length === since.items.length && rows.length > 0, `${page.url()} ${rows.length}`);
  await page.goto(`${BASE}/`, { waitUntil: 'load' });
  await page.fill('input[name=until]', today);
  await Promise.all([page.waitForNavigation({ waitUntil: 'load' }), page.click('button[type=submit]')]);
  const empty = await page.evaluate(() => document.querySelector('#empty')?.textContent || '');
  t.check(`list: until ${today} (exclusive) lists none`, /No analyses match/.test(empty), `${page.url()} ${empty}`);

  // pages of two, following the next link, equal the API's pages
  await page.goto(`${BASE}/?limit=2`, { waitUntil: 'load' });
  const seen = [];
  for (let k = 0; k < 10; k++) {
    rows = await listRows(page);
    seen.push(...rows.map((r) => r.href));
    const next = await page.$('#next-page');
    if (!next) break;
    await Promise.all([page.waitForNavigation({ waitUntil: 'load' }), next.click()]);
  }
  t.check(`list: pages of 2 joined (${seen.length}) equal the full list`, JSON.stringify(seen) === JSON.stringify(all.items.map((i) => `analyses/${i.id}`)), JSON.stringify(seen));
  await page.screenshot({ path: slugFile(artefacts, 'list-last-page'), fullPage: true });

  // a link from the list opens the analysis
  await page.goto(`${BASE}/`, { waitUntil: 'load' });
  await Promise.all([page.waitForNavigation({ waitUntil: 'load' }), page.click(`a[href="analyses/${made[0].id}"]`)]);
  t.check('list: a row links to its analysis page', page.url() === `${BASE}/analyses/${made[0].id}`, page.url());
}

async function stopDaemon(daemon) {
  daemon.child.kill('SIGTERM');
  return new Promise((r) => {
    const timer = setTimeout(() => {
      daemon.child.kill('SIGKILL');
      r('killed after 10 s');
    }, 10000);
    daemon.child.on('exit', (c, sig) => {
      clearTimeout(timer);
      r(c === null ? sig : c);
    });
  });
}

// With a tokens file the pages need the read role, like the JSON they show
// (a browser gets it from a dashboard proxy); the favicon stays open.
async function checkTokens(bin, dir) {
  const token = 'quillfeather-pages-read-token';
  const file = path.join(dir, 'tokens');
  fs.writeFileSync(file, `read ${crypto.createHash('sha256').update(token).digest('hex')}\n`, { mode: 0o600 });
  const d = await startDaemon(bin, dir, ['--tokens', file]);
  try {
    const base = `http://127.0.0.1:${d.port}`;
    const bare = await fetch(`${base}/`);
    t.check('tokens: GET / without a token → 401 with WWW-Authenticate', bare.status === 401 && /^Bearer/.test(bare.headers.get('www-authenticate') || ''), `${bare.status}`);
    const page = await fetch(`${base}/analyses/an_00000000000000000000`);
    t.check('tokens: GET /analyses/{id} without a token → 401', page.status === 401, `${page.status}`);
    const fig = await fetch(`${base}/v1/analyses/an_00000000000000000000/figures/spectrum.svg`);
    t.check('tokens: a figure without a token → 401', fig.status === 401, `${fig.status}`);
    const read = await fetch(`${base}/`, { headers: { Authorization: `Bearer ${token}` } });
    t.check('tokens: GET / with a read token → 200 text/html', read.status === 200 && /^text\/html/.test(read.headers.get('content-type') || ''), `${read.status}`);
    const fav = await fetch(`${base}/favicon.ico`);
    t.check('tokens: /favicon.ico stays open', fav.status === 200, `${fav.status}`);
  } finally {
    await stopDaemon(d);
  }
}

async function main() {
  const [binArg, artefactsArg] = process.argv.slice(2);
  if (!binArg || !artefactsArg) {
    t.check('usage: node pages.mjs path/to/swapspec path/to/artefacts', false);
    return;
  }
  const artefacts = path.resolve(artefactsArg);
  fs.mkdirSync(artefacts, { recursive: true });
  for (const f of fs.readdirSync(artefacts)) if (f.endsWith('.png')) fs.unlinkSync(path.join(artefacts, f));
  const dir = fs.mkdtempSync(path.join(os.tmpdir(), 'swapspec-pages-'));
  let daemon = null;
  let browser = null;
  try {
    daemon = await startDaemon(path.resolve(binArg), dir);
    BASE = `http://127.0.0.1:${daemon.port}`;
    t.check(`daemon listens on ${BASE}`, true);
    const made = await makeAnalyses();

    browser = await chromium.launch({ executablePath: CHROMIUM, headless: true });
    t.check(`chromium ${browser.version()} starts`, true);
    const context = await browser.newContext({ viewport: { width: 1100, height: 900 } });
    const page = await context.newPage();
    const problems = [];
    const requests = [];
    page.on('console', (m) => {
      if (m.type() === 'error' || m.type() === 'warning') problems.push(`console ${m.type()}: ${m.text()} (${page.url()})`);
    });
    page.on('pageerror', (e) => problems.push(`page error: ${e.message}`));
    page.on('requestfailed', (r) => problems.push(`request failed: ${r.url()} ${r.failure()?.errorText}`));
    page.on('request', (r) => requests.push(r.url()));
    page.on('response', (r) => {
      if (r.status() >= 400) problems.push(`HTTP ${r.status()} for ${r.url()}`);
    });

    await checkListPage(page, made, artefacts);
    for (const a of made) await checkAnalysisPage(page, a, artefacts);
    await checkFigureRoutes(page, made.find((a) => a.slug === 'reprocessed'), artefacts);
    await checkFigureRoutes(page, made.find((a) => a.slug === 'degenerate-d3'), artefacts);

    const outside = requests.filter((u) => !u.startsWith(BASE) && !u.startsWith('data:') && u !== 'about:blank');
    t.check('no request leaves the daemon (no outside fonts, scripts or styles)', outside.length === 0, outside.join('\n'));
    t.check('the browser never asked for /favicon.ico (the pages carry their icon)', !requests.some((u) => u.endsWith('/favicon.ico')));
    const fav = await fetch(`${BASE}/favicon.ico`);
    t.check('GET /favicon.ico is an icon', fav.status === 200 && fav.headers.get('content-type') === 'image/vnd.microsoft.icon' && (await fav.arrayBuffer()).byteLength > 22);
    t.check('no console error or warning, page error, failed request or HTTP error in the browser', problems.length === 0, problems.join('\n'));
    await context.close();

    // static figures need no JavaScript
    const noJs = await browser.newContext({ javaScriptEnabled: false, viewport: { width: 1100, height: 900 } });
    const p2 = await noJs.newPage();
    await p2.goto(`${BASE}/analyses/${made[1].id}`, { waitUntil: 'load' });
    const box = await p2.locator('svg#fig-readings').boundingBox();
    t.check('with JavaScript off the readings figure still has a box', box && box.width > 300 && box.height > 100, JSON.stringify(box));
    await p2.screenshot({ path: slugFile(artefacts, 'analysis-per-shot-d3-no-javascript'), fullPage: true });
    await noJs.close();
    const shots = fs.readdirSync(artefacts).filter((f) => f.endsWith('.png'));
    t.check(`${shots.length} screenshots written to ${artefacts}`, shots.length >= 10, shots.join(', '));
    await checkTokens(path.resolve(binArg), fs.mkdtempSync(path.join(dir, 'tokens-')));
  } catch (e) {
    t.check('the browser checks ran to the end', false, e.stack || e.message);
  } finally {
    if (browser) await browser.close().catch(() => {});
    if (daemon) {
      const code = await stopDaemon(daemon);
      fs.writeFileSync(path.join(artefacts, 'daemon.log'), daemon.lines.join('\n') + '\n');
      // a sanitizer build reports leaks and undefined behaviour on stderr
      const reports = daemon.lines.filter((l) => /ERROR: (LeakSanitizer|AddressSanitizer)|runtime error:/.test(l));
      t.check('the daemon stops cleanly on SIGTERM (exit 0, no sanitizer report)', code === 0 && reports.length === 0, [`exit ${code}`, ...reports].join('\n'));
    }
    fs.rmSync(dir, { recursive: true, force: true });
  }
}

main()
  .catch((e) => t.check('pages.mjs crashed', false, e.stack || e.message))
  .finally(() => process.exit(t.finish()));
