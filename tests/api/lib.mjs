// lib.mjs — helpers shared by the api-spec checks: where the spec is, the
// JSON Schema 2020-12 validator set up for OpenAPI 3.1 schemas, media-type
// matching, response lookup, and the pass/fail tally every script prints.
import { createRequire } from 'node:module';
import path from 'node:path';
import { fileURLToPath } from 'node:url';

const require = createRequire(import.meta.url);
const Ajv2020 = require('ajv/dist/2020');
const addFormats = require('ajv-formats');

export const HERE = path.dirname(fileURLToPath(import.meta.url));
export const REPO = path.resolve(HERE, '..', '..');
export const SPEC_PATH = process.env.SWAPSPEC_OPENAPI
  ? path.resolve(process.env.SWAPSPEC_OPENAPI)
  : path.join(REPO, 'api-spec', 'openapi.yaml');

export const HTTP_METHODS = ['get', 'put', 'post', 'delete', 'options', 'head', 'patch', 'trace'];

// Ajv for OpenAPI 3.1 schema objects (JSON Schema 2020-12 plus the OAS
// annotation keywords).  Strict mode stays on so that a misspelt keyword in
// the spec is an error, not a silently ignored annotation.
export function makeAjv() {
  const ajv = new Ajv2020({ allErrors: true, strict: true, strictRequired: false, allowUnionTypes: true, validateFormats: true });
  addFormats(ajv);
  ajv.addVocabulary(['example', 'discriminator', 'xml', 'externalDocs']);
  return ajv;
}

// Compiles schemas once per object identity (the dereferenced spec shares
// objects between routes).
export function makeValidatorCache(ajv) {
  const cache = new Map();
  return (schema) => {
    let v = cache.get(schema);
    if (!v) {
      v = ajv.compile(schema);
      cache.set(schema, v);
    }
    return v;
  };
}

export function formatAjvErrors(errors, limit = 6) {
  if (!errors) return '';
  const lines = errors.slice(0, limit).map((e) => {
    const extra = e.params && Object.keys(e.params).length ? ' ' + JSON.stringify(e.params) : '';
    return `${e.instancePath || '(root)'} ${e.message}${extra}`;
  });
  if (errors.length > limit) lines.push(`... and ${errors.length - limit} more`);
  return lines.join('; ');
}

// "text/plain; version=0.0.4; charset=utf-8" -> {type:"text/plain", params:{...}}
export function parseMediaType(value) {
  if (typeof value !== 'string') return null;
  const [head, ...rest] = value.split(';');
  const type = head.trim().toLowerCase();
  if (!/^[a-z0-9!#$&^_.+-]+\/[a-z0-9!#$&^_.+-]+$/.test(type)) return null;
  const params = {};
  for (const p of rest) {
    const i = p.indexOf('=');
    if (i < 0) return null;
    const k = p.slice(0, i).trim().toLowerCase();
    let v = p.slice(i + 1).trim();
    if (v.startsWith('"') && v.endsWith('"') && v.length >= 2) v = v.slice(1, -1);
    params[k] = v;
  }
  return { type, params };
}

// The key of `content` that a live Content-Type matches: same type/subtype,
// every parameter of the spec's key present with the same value, and no
// other parameter than charset=utf-8 (case-insensitive).
export function matchMediaType(content, contentType) {
  const live = parseMediaType(contentType);
  if (!live) return null;
  for (const key of Object.keys(content || {})) {
    const want = parseMediaType(key);
    if (!want || want.type !== live.type) continue;
    let ok = true;
    for (const [k, v] of Object.entries(want.params))
      if ((live.params[k] || '').toLowerCase() !== v.toLowerCase()) ok = false;
    for (const [k, v] of Object.entries(live.params))
      if (!(k in want.params) && !(k === 'charset' && v.toLowerCase() === 'utf-8')) ok = false;
    if (ok) return key;
  }
  return null;
}

export function operations(spec) {
  const out = [];
  for (const [p, item] of Object.entries(spec.paths || {}))
    for (const m of HTTP_METHODS) if (item[m]) out.push({ path: p, method: m.toUpperCase(), op: item[m] });
  return out;
}

// The role list of an operation's security requirement: [] for open
// operations, ['write'] for bearerAuth: [write].
export function operationRoles(spec, op) {
  const reqs = op.security !== undefined ? op.security : spec.security || [];
  const roles = [];
  for (const r of reqs) for (const list of Object.values(r)) roles.push(...list);
  return { open: reqs.length === 0, roles };
}

// Tally of checks: one line each, a plain summary line at the end.
export class Tally {
  constructor() {
    this.passed = 0;
    this.failed = 0;
    this.skipped = 0;
  }
  ok(name) {
    this.passed++;
    console.log(`ok   ${name}`);
  }
  fail(name, detail) {
    this.failed++;
    console.log(`FAIL ${name}${detail ? `\n     ${String(detail).replace(/\n/g, '\n     ')}` : ''}`);
  }
  skip(name, why) {
    this.skipped++;
    console.log(`skip ${name}: ${why}`);
  }
  check(name, cond, detail) {
    if (cond) this.ok(name);
    else this.fail(name, typeof detail === 'function' ? detail() : detail);
    return !!cond;
  }
  finish() {
    const skipped = this.skipped ? `, ${this.skipped} skipped` : '';
    console.log(`${this.passed} passed, ${this.failed} failed${skipped}`);
    return this.failed === 0 ? 0 : 1;
  }
}
