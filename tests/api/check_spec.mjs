// check_spec.mjs — static checks of api-spec/openapi.yaml.
//
//  1. The document is a valid OpenAPI 3.1 description (SwaggerParser.validate).
//  2. It lints clean with Redocly (ruleset in redocly.yaml), when installed.
//  3. Every example validates against its schema (Ajv, JSON Schema 2020-12).
//  4. The problem types match the status table SS_STATUS_MAP of
//     core/include/swapspec.h (name, HTTP status, title), and every error
//     response only carries problems of its own status.
//  5. House rules of the contract: the contract's routes are all there,
//     request bodies reject unknown fields at every level, errors are
//     application/problem+json, every /v1 operation names its role (admin
//     for the calibration PUT and reprocessing), POST and PUT routes list
//     400/413/415/422, /v1 routes list 401/403/405.
//
// Usage: node check_spec.mjs        (exit 0 when every check passes)
import fs from 'node:fs';
import path from 'node:path';
import { spawnSync } from 'node:child_process';
import SwaggerParser from '@apidevtools/swagger-parser';
import {
  HERE,
  REPO,
  SPEC_PATH,
  Tally,
  formatAjvErrors,
  makeAjv,
  makeValidatorCache,
  operationRoles,
  operations,
} from './lib.mjs';

const t = new Tally();

// The routes of the service contract (issues 4 and 5), method and path
// template, with the role each needs (null: open).
const CONTRACT = new Map([
  ['POST /v1/predictions', 'write'],
  ['POST /v1/candidates', 'write'],
  ['POST /v1/simulations', 'write'],
  ['POST /v1/analyses', 'write'],
  ['GET /v1/analyses', 'read'],
  ['GET /v1/analyses/{id}', 'read'],
  ['GET /v1/analyses/{id}/revisions', 'read'],
  ['PUT /v1/calibrations/{name}', 'admin'],
  ['GET /v1/calibrations/{name}', 'read'],
  ['GET /v1/calibrations', 'read'],
  ['POST /v1/reprocessing', 'admin'],
  ['GET /v1/jobs/{id}', 'read'],
  ['GET /healthz', null],
  ['GET /metrics', null],
  // issue 6: pages and figures for people (server/handlers_pages.c)
  ['GET /v1/analyses/{id}/figures/{name}.svg', 'read'],
  ['GET /', 'read'],
  ['GET /analyses/{id}', 'read'],
  ['GET /favicon.ico', null],
]);
const CONTRACT_ROUTES = [...CONTRACT.keys()];
const OPEN_PATHS = new Set(['/healthz', '/metrics', '/favicon.ico']);

async function main() {
  console.log(`# spec: ${path.relative(process.cwd(), SPEC_PATH) || SPEC_PATH}`);
  let raw;
  try {
    raw = await SwaggerParser.parse(SPEC_PATH);
    t.ok('spec parses (YAML)');
  } catch (e) {
    t.fail('spec parses (YAML)', e.message);
    return;
  }
  t.check('openapi version is 3.1.x', /^3\.1\.\d+$/.test(String(raw.openapi)), `openapi: ${raw.openapi}`);

  let spec;
  try {
    // validate() checks against the OpenAPI 3.1 meta-schema and resolves
    // every $ref; it returns the dereferenced document.
    spec = await SwaggerParser.validate(structuredClone(raw));
    t.ok('SwaggerParser.validate: valid OpenAPI 3.1');
  } catch (e) {
    t.fail('SwaggerParser.validate: valid OpenAPI 3.1', e.message);
    return;
  }

  lint();
  checkExamples(spec);
  checkStatusTable(raw, spec);
  checkHouseRules(raw, spec);
}

// --- 2. Redocly -----------------------------------------------------------
function lint() {
  const bin = path.join(HERE, 'node_modules', '@redocly', 'cli', 'bin', 'cli.js');
  if (!fs.existsSync(bin)) {
    t.skip('redocly lint', '@redocly/cli is not installed');
    return;
  }
  const res = spawnSync(
    process.execPath,
    [bin, 'lint', '--config', path.join(HERE, 'redocly.yaml'), '--format', 'codeframe', SPEC_PATH],
    {
      encoding: 'utf8',
      env: {
        ...process.env,
        REDOCLY_TELEMETRY: 'off',
        REDOCLY_SUPPRESS_UPDATE_NOTICE: 'true',
        REDOCLY_SUPPRESS_NOTIFICATIONS: 'true',
      },
      timeout: 120000,
    },
  );
  const out = `${res.stdout || ''}${res.stderr || ''}`
    .split('\n')
    .filter((l) => !/[╔╗╚╝║]/.test(l)) // the Node 20 deprecation banner
    .join('\n')
    .trim();
  const warnings = /(\d+) warnings?/.exec(out);
  const clean = res.status === 0 && (!warnings || warnings[1] === '0');
  t.check('redocly lint (recommended-strict, see redocly.yaml)', clean, () =>
    res.error ? res.error.message : out.split('\n').slice(-60).join('\n'),
  );
}

// --- 3. Examples ------------------------------------------------------------
function checkExamples(spec) {
  const ajv = makeAjv();
  const compile = makeValidatorCache(ajv);
  let count = 0;
  const checkOne = (where, schema, value) => {
    count++;
    let validate;
    try {
      validate = compile(schema);
    } catch (e) {
      t.fail(`schema compiles: ${where}`, e.message);
      return;
    }
    t.check(`example valid: ${where}`, validate(value), () => formatAjvErrors(validate.errors));
  };
  const media = (where, content) => {
    for (const [mt, m] of Object.entries(content || {})) {
      if (!m.schema) continue;
      if (m.example !== undefined) checkOne(`${where} ${mt}`, m.schema, m.example);
      for (const [name, ex] of Object.entries(m.examples || {}))
        if (ex && ex.value !== undefined) checkOne(`${where} ${mt} [${name}]`, m.schema, ex.value);
    }
  };
  for (const { path: p, method, op } of operations(spec)) {
    const where = `${method} ${p}`;
    for (const prm of op.parameters || [])
      if (prm.example !== undefined && prm.schema) checkOne(`${where} parameter ${prm.name}`, prm.schema, prm.example);
    if (op.requestBody) media(`${where} request`, op.requestBody.content);
    for (const [code, r] of Object.entries(op.responses || {})) media(`${where} ${code}`, r.content);
  }
  // Every schema of the document compiles under strict Ajv, also the unused.
  for (const [name, schema] of Object.entries(spec.components?.schemas || {})) {
    try {
      compile(schema);
    } catch (e) {
      t.fail(`schema compiles: components/schemas/${name}`, e.message);
    }
  }
  t.check('the spec has examples to check', count >= 10, `only ${count} examples`);
}

// --- 4. Status table ---------------------------------------------------------
function readStatusTable() {
  const header = path.join(REPO, 'core', 'include', 'swapspec.h');
  const text = fs.readFileSync(header, 'utf8').replace(/\\\n/g, ' ');
  const start = text.indexOf('#define SS_STATUS_MAP(X)');
  if (start < 0) throw new Error(`no SS_STATUS_MAP in ${header}`);
  const body = text.slice(start, text.indexOf('\n', start));
  const rows = [];
  const re = /X\(\s*(SS_\w+)\s*,\s*"([^"]*)"\s*,\s*(\d+)\s*,\s*((?:"(?:[^"\\]|\\.)*"\s*)+)\)/g;
  for (let m; (m = re.exec(body)); ) {
    const message = [...m[4].matchAll(/"((?:[^"\\]|\\.)*)"/g)].map((x) => x[1]).join('');
    rows.push({ code: m[1], name: m[2], http: Number(m[3]), message });
  }
  return rows;
}

const pascal = (name) =>
  name
    .split('-')
    .map((w) => w[0].toUpperCase() + w.slice(1))
    .join('');

function constsOf(schema, prop) {
  // The const of `prop` in a Problem<Name> schema, or in each alternative.
  if (!schema) return [];
  if (schema.oneOf) return schema.oneOf.flatMap((s) => constsOf(s, prop));
  if (schema.anyOf) return schema.anyOf.flatMap((s) => constsOf(s, prop));
  const c = schema.properties?.[prop]?.const;
  return c === undefined ? [] : [c];
}

function checkStatusTable(raw, spec) {
  let rows;
  try {
    rows = readStatusTable();
  } catch (e) {
    t.fail('read SS_STATUS_MAP from core/include/swapspec.h', e.message);
    return;
  }
  const errorRows = rows.filter((r) => r.http >= 400);
  t.check('SS_STATUS_MAP has error rows', errorRows.length >= 10, `${errorRows.length} rows found`);
  const schemas = raw.components?.schemas || {};
  const expected = new Set();
  for (const r of errorRows) {
    const key = `Problem${pascal(r.name)}`;
    expected.add(key);
    const s = schemas[key];
    if (!s) {
      t.fail(`problem type ${r.name} (${r.http}) is in the spec`, `components/schemas/${key} is missing`);
      continue;
    }
    const got = {
      type: s.properties?.type?.const,
      title: s.properties?.title?.const,
      status: s.properties?.status?.const,
    };
    const want = { type: `urn:swapspec:problem:${r.name}`, title: r.message, status: r.http };
    t.check(
      `problem type ${r.name} matches the status table`,
      got.type === want.type && got.title === want.title && got.status === want.status,
      `spec ${JSON.stringify(got)} vs table ${JSON.stringify(want)}`,
    );
  }
  const extra = Object.keys(schemas).filter((k) => /^Problem.+/.test(k) && !expected.has(k));
  t.check('every Problem<Name> schema is a row of the status table', extra.length === 0, `not in the table: ${extra.join(', ')}`);

  // Each error response carries only problems of its own status.
  const bad = [];
  for (const { path: p, method, op } of operations(spec))
    for (const [code, r] of Object.entries(op.responses || {})) {
      const pj = r.content?.['application/problem+json'];
      if (!pj) continue;
      const statuses = constsOf(pj.schema, 'status');
      if (statuses.length === 0 || statuses.some((s) => String(s) !== code))
        bad.push(`${method} ${p} ${code}: problem statuses ${JSON.stringify(statuses)}`);
    }
  t.check('error responses carry problems of their own status', bad.length === 0, bad.join('\n'));
}

// --- 5. House rules ----------------------------------------------------------
function objectSchemasWithoutClosedProperties(schema, where, seen = new Set(), out = []) {
  if (!schema || typeof schema !== 'object' || seen.has(schema)) return out;
  seen.add(schema);
  const isObject = schema.type === 'object' || (Array.isArray(schema.type) && schema.type.includes('object')) || schema.properties;
  if (isObject && schema.additionalProperties !== false) out.push(where);
  for (const [k, v] of Object.entries(schema)) {
    if (k === 'properties') for (const [pk, pv] of Object.entries(v)) objectSchemasWithoutClosedProperties(pv, `${where}.${pk}`, seen, out);
    else if (k === 'items' || k === 'additionalProperties' || k === 'not') objectSchemasWithoutClosedProperties(v, `${where}[${k}]`, seen, out);
    else if (['oneOf', 'anyOf', 'allOf', 'prefixItems'].includes(k)) v.forEach((s, i) => objectSchemasWithoutClosedProperties(s, `${where}(${k}${i})`, seen, out));
  }
  return out;
}

function checkHouseRules(raw, spec) {
  const ops = operations(spec);
  const have = new Set(ops.map((o) => `${o.method} ${o.path}`));
  for (const r of CONTRACT_ROUTES) t.check(`contract route ${r} is in the spec`, have.has(r));
  const extra = [...have].filter((r) => !CONTRACT_ROUTES.includes(r));
  t.check('the spec has no route outside the contract', extra.length === 0, extra.join(', '));

  for (const { path: p, method, op } of ops) {
    const where = `${method} ${p}`;
    const problems = [];
    if (!op.operationId) problems.push('no operationId');
    if (!op.summary) problems.push('no summary');
    const { open, roles } = operationRoles(spec, op);
    if (OPEN_PATHS.has(p)) {
      if (!open) problems.push('should be open (security: [])');
    } else {
      const want = CONTRACT.get(where) || (method === 'GET' ? 'read' : 'write');
      if (open || roles.length !== 1 || roles[0] !== want) problems.push(`security roles ${JSON.stringify(roles)}, want ["${want}"]`);
      for (const c of ['401', '403', '405']) if (!op.responses[c]) problems.push(`no ${c} response`);
      if (op.responses['401'] && !op.responses['401'].headers?.['WWW-Authenticate']?.required)
        problems.push('401 without a required WWW-Authenticate header');
    }
    if (op.responses['405'] && !op.responses['405'].headers?.Allow?.required) problems.push('405 without a required Allow header');
    if (op.responses['503'] && !op.responses['503'].headers?.['Retry-After']) problems.push('503 does not document Retry-After');
    if (method === 'POST' || method === 'PUT') {
      for (const c of ['400', '413', '415', '422']) if (!op.responses[c]) problems.push(`no ${c} response`);
      const content = op.requestBody?.content || {};
      const types = Object.keys(content);
      if (!op.requestBody?.required || types.length !== 1 || types[0] !== 'application/json')
        problems.push(`request body must be required and application/json only (has ${types.join(', ')})`);
      const m = content['application/json'];
      if (m) {
        if (!m.examples || Object.keys(m.examples).length === 0) problems.push('request body has no example');
        const open = objectSchemasWithoutClosedProperties(m.schema, 'body');
        if (open.length) problems.push(`objects without additionalProperties: false: ${open.join(', ')}`);
      }
    }
    for (const [code, r] of Object.entries(op.responses)) {
      const types = Object.keys(r.content || {});
      const n = Number(code);
      if (n >= 400 && !(p === '/healthz' && code === '503') && (types.length !== 1 || types[0] !== 'application/problem+json'))
        problems.push(`${code} is not application/problem+json only (${types.join(', ')})`);
      if (n < 300 && types.length === 0) problems.push(`${code} has no content`);
    }
    t.check(`house rules: ${where}`, problems.length === 0, problems.join('\n'));
  }

  const metrics = spec.paths['/metrics']?.get?.responses?.['200']?.content || {};
  t.check('GET /metrics 200 is text/plain; version=0.0.4', Object.keys(metrics).join() === 'text/plain; version=0.0.4', Object.keys(metrics).join());

  const created = spec.paths['/v1/analyses']?.post?.responses || {};
  t.check(
    'POST /v1/analyses: 201 with Location, 200 replay with Idempotent-Replayed, 409 and 422',
    created['201']?.headers?.Location?.required &&
      created['200']?.headers?.['Idempotent-Replayed']?.required &&
      created['409'] &&
      constsOf(created['422']?.content?.['application/problem+json']?.schema, 'type').includes('urn:swapspec:problem:idempotency-key-reused'),
  );
  const idem = (spec.paths['/v1/analyses']?.post?.parameters || []).find((x) => x.in === 'header' && x.name === 'Idempotency-Key');
  t.check('POST /v1/analyses takes an Idempotency-Key header', idem && !idem.required);
  const list = (spec.paths['/v1/analyses']?.get?.parameters || []).map((x) => `${x.in}:${x.name}`).sort();
  t.check(
    'GET /v1/analyses takes label, since, until, limit, cursor',
    JSON.stringify(list) === JSON.stringify(['query:cursor', 'query:label', 'query:limit', 'query:since', 'query:until']),
    JSON.stringify(list),
  );

  const text = JSON.stringify(raw.info?.description || '') + JSON.stringify(raw.components?.schemas?.SpectrumEstimate?.description || '');
  t.check('descriptions say that spectra are statistical estimates', /statistical estimate/.test(text) && /uncertaint|standard error/.test(text));
}

main()
  .catch((e) => t.fail('check_spec crashed', e.stack || e.message))
  .finally(() => process.exit(t.finish()));
