// routes_drift.mjs — the daemon's route table against api-spec/openapi.yaml.
//
// Runs `<swapspec> routes`, which prints the route table of `swapspec serve`
// as a JSON array [{"method":"GET","path":"/v1/analyses/{id}","role":"read"},
// ...], and fails when a route is served but not in the spec, when a spec
// operation is not served (method + path template), or when the role a
// route needs differs from the role in the operation's security requirement.
//
// Usage: node routes_drift.mjs path/to/swapspec
import { spawnSync } from 'node:child_process';
import path from 'node:path';
import SwaggerParser from '@apidevtools/swagger-parser';
import { SPEC_PATH, Tally, operationRoles, operations } from './lib.mjs';

const t = new Tally();
// Names the route table may use for a route that needs no token.
const OPEN_ROLES = new Set([null, '', 'none', 'open', 'public']);

async function main() {
  const binArg = process.argv[2];
  if (!binArg) {
    t.fail('usage', 'node routes_drift.mjs path/to/swapspec');
    return;
  }
  const bin = path.resolve(binArg);
  const spec = await SwaggerParser.dereference(SPEC_PATH);

  const res = spawnSync(bin, ['routes'], { encoding: 'utf8', timeout: 20000 });
  if (res.error || res.status !== 0) {
    t.fail(
      '`swapspec routes` runs',
      res.error ? res.error.message : `exit ${res.status}: ${(res.stderr || '').trim().slice(0, 400)}`,
    );
    return;
  }
  let table;
  try {
    table = JSON.parse(res.stdout);
  } catch (e) {
    t.fail('`swapspec routes` prints JSON', `${e.message}: ${res.stdout.slice(0, 200)}`);
    return;
  }
  const shapeOk =
    Array.isArray(table) &&
    table.length > 0 &&
    table.every(
      (r) =>
        r &&
        typeof r === 'object' &&
        typeof r.method === 'string' &&
        /^[A-Z]+$/.test(r.method) &&
        typeof r.path === 'string' &&
        r.path.startsWith('/') &&
        (r.role === null || typeof r.role === 'string'),
    );
  if (!t.check('`swapspec routes` prints an array of {method, path, role}', shapeOk, res.stdout.slice(0, 300))) return;

  const served = new Map();
  const dups = [];
  for (const r of table) {
    const key = `${r.method} ${r.path}`;
    if (served.has(key)) dups.push(key);
    served.set(key, r);
  }
  t.check('the route table has no duplicate (method, path)', dups.length === 0, dups.join(', '));

  const specOps = new Map(operations(spec).map((o) => [`${o.method} ${o.path}`, o]));
  for (const [key, o] of specOps) {
    const r = served.get(key);
    if (!t.check(`spec operation ${key} is served`, r !== undefined, `${o.op.operationId} is not in the route table`)) continue;
    const { open, roles } = operationRoles(spec, o.op);
    const roleOk = open ? OPEN_ROLES.has(r.role) : roles.length === 1 && r.role === roles[0];
    t.check(
      `role of ${key} agrees (spec ${open ? 'open' : roles.join('|')}, daemon ${JSON.stringify(r.role)})`,
      roleOk,
      open ? 'the spec says this route is open (security: [])' : `the spec's security requirement lists ${JSON.stringify(roles)}`,
    );
  }
  for (const key of served.keys())
    if (!specOps.has(key)) t.fail(`served route ${key} is in the spec`, 'the daemon serves it but api-spec/openapi.yaml has no such operation');
}

main()
  .catch((e) => t.fail('routes_drift crashed', e.stack || e.message))
  .finally(() => process.exit(t.finish()));
