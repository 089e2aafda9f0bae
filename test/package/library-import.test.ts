/**
 * `import { ... } from 'ratchet'` from a packed install: `npm pack` the built package, install the tarball
 * into a fresh prefix (offline, from npm's cache), and import the package by name from a folder outside
 * the repository, with plain node (no tsx) and, for the types, with tsc. What the import must give is
 * what docs/library.md promises: the atoms core, the gates and the ledger reader.
 * Checked figures: a cubic silicon cell of a = 5.431 Å (design notes) has volume a^3 = 160.19 Å^3;
 * k_B = 8.617333262e-5 eV/K (CODATA 2018); an H-H pair 0.2 Å apart is a contact (Cordero et al. 2008,
 * H 0.31 Å: limit 0.7 x 0.62 = 0.434 Å), an H-H pair 0.74 Å apart is not.
 *
 * Needs a built package (`npm run build`; `npm test` builds first): refused with a message otherwise.
 * Skipped with a message when npm cannot install the tarball's dependencies from its cache.
 */
import { execFileSync, spawnSync } from 'node:child_process';
import { existsSync, mkdirSync, mkdtempSync, readdirSync, realpathSync, rmSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { fileURLToPath } from 'node:url';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';

const REPO = fileURLToPath(new URL('../../', import.meta.url));
const root = realpathSync(mkdtempSync(join(tmpdir(), 'ratchet-lib-')));
const prefix = join(root, 'prefix');
let installProblem: string | undefined;

beforeAll(() => {
  if (!existsSync(join(REPO, 'dist/index.js')) || !existsSync(join(REPO, 'dist/index.d.ts'))) {
    throw new Error(`${join(REPO, 'dist/index.js')}: the package is not built (run \`npm run build\` first; \`npm test\` does)`);
  }
  execFileSync('npm', ['pack', '--ignore-scripts', '--pack-destination', root], { cwd: REPO, stdio: 'pipe' });
  const tgz = readdirSync(root).find((f) => f.endsWith('.tgz'));
  if (!tgz) throw new Error(`npm pack wrote no tarball into ${root}`);
  mkdirSync(prefix);
  const inst = spawnSync('npm', ['install', '--prefix', prefix, '--offline', '--no-audit', '--no-fund', '--ignore-scripts', join(root, tgz)], { cwd: root, encoding: 'utf8' });
  if (inst.status !== 0) {
    installProblem = `npm install --offline of the packed tarball failed (dependencies not in npm's cache?):\n${inst.stderr.slice(-2000)}`;
    console.warn(`library-import test skipped: ${installProblem}`);
  }
}, 300_000);
afterAll(() => rmSync(root, { recursive: true, force: true }));

const CONSUMER = `
import * as ratchet from 'ratchet';
import { readFrames, writeFrames, cellVolume, KB_EV_PER_K, covalentRadius, checkContacts, contactsFrame,
  checkDrift, checkErrors, checkCommittee, committeeFrame, errorsFrame, driftFrame, readLedger, upstream, downstream,
  lineageQuery, minimumDistance, VERSION } from 'ratchet';
import { writeFileSync, mkdirSync } from 'node:fs';
const dir = process.argv[2];
const h2 = (d) => ({ species: ['H', 'H'], positions: new Float64Array([0, 0, 0, d, 0, 0]), cell: null, pbc: [false, false, false],
  arrays: new Map(), info: new Map([['energy', -1]]) });
await writeFrames(dir + '/h2.xyz', [h2(0.74), h2(0.2)]);
const back = [];
for await (const f of readFrames(dir + '/h2.xyz')) back.push(f);
const contacts = await checkContacts([dir + '/h2.xyz']);
const a = 5.431;
mkdirSync(dir + '/camp/.ratchet', { recursive: true });
writeFileSync(dir + '/camp/.ratchet/ledger.jsonl', JSON.stringify({ seq: 1, at: '2026-01-01T00:00:00.000Z', type: 'campaign_identity', name: 'x', file: 'c.yaml', path: '/x/c.yaml' }) + '\\n');
const ledger = await readLedger(dir + '/camp');
console.log(JSON.stringify({
  frames: back.length, d: back.map((f) => f.positions[3]),
  volume: cellVolume([a, 0, 0, 0, a, 0, 0, 0, a]), kB: KB_EV_PER_K, rH: covalentRadius('H'),
  verdict: contacts.verdict, violations: contacts.figures.violation_count,
  functions: [checkDrift, checkErrors, checkCommittee, committeeFrame, errorsFrame, driftFrame, contactsFrame, upstream, downstream, lineageQuery, minimumDistance].map((f) => typeof f),
  events: ledger.events.map((e) => e.type), version: VERSION, names: Object.keys(ratchet).length,
}));
`;

const TYPED = `
import { readFrames, checkContacts, type Frame, type GateResult, type LedgerEvent, readLedger } from 'ratchet';
export async function first(path: string): Promise<Frame | undefined> {
  for await (const f of readFrames(path)) return f;
  return undefined;
}
export async function verdict(path: string): Promise<GateResult<object>['verdict']> {
  return (await checkContacts([path])).verdict;
}
export async function types(dir: string): Promise<string[]> {
  const r = await readLedger(dir);
  return r.events.map((e: LedgerEvent) => e.type);
}
// @ts-expect-error: a wrong argument type must be caught through the package's declarations
export const wrong = checkContacts('not-an-array');
`;

describe("import from 'ratchet' in a packed install", () => {
  it('gives the atoms core, the gates and the ledger reader to plain node', (ctx) => {
    if (installProblem) ctx.skip();
    const work = join(prefix, 'work');
    mkdirSync(work, { recursive: true });
    writeFileSync(join(prefix, 'consumer.mjs'), CONSUMER);
    const r = spawnSync(process.execPath, [join(prefix, 'consumer.mjs'), work], { cwd: prefix, encoding: 'utf8' });
    expect(r.stderr).toBe('');
    expect(r.status).toBe(0);
    const o = JSON.parse(r.stdout);
    expect(o.frames).toBe(2);
    expect(o.d).toEqual([0.74, 0.2]);
    expect(o.volume).toBeCloseTo(5.431 ** 3, 9);
    expect(o.volume).toBeCloseTo(160.19, 2);
    expect(o.kB).toBe(8.617333262e-5);
    expect(o.rH).toBe(0.31);
    expect(o.verdict).toBe('fail');
    expect(o.violations).toBe(1);
    expect(o.functions.every((t: string) => t === 'function')).toBe(true);
    expect(o.events).toEqual(['campaign_identity']);
    expect(o.version).toMatch(/^\d+\.\d+\.\d+/);
  });

  it('has declarations that tsc resolves by the package name', (ctx) => {
    if (installProblem) ctx.skip();
    writeFileSync(join(prefix, 'typed.ts'), TYPED);
    writeFileSync(
      join(prefix, 'tsconfig.json'),
      JSON.stringify({
        compilerOptions: { module: 'nodenext', moduleResolution: 'nodenext', target: 'es2022', strict: true, noEmit: true, skipLibCheck: true, types: ['node'], typeRoots: [join(REPO, 'node_modules/@types')] },
        files: ['typed.ts'],
      }),
    );
    writeFileSync(join(prefix, 'package.json'), JSON.stringify({ type: 'module', dependencies: { ratchet: '*' } }));
    const r = spawnSync(process.execPath, [join(REPO, 'node_modules/typescript/bin/tsc'), '-p', join(prefix, 'tsconfig.json')], { cwd: prefix, encoding: 'utf8' });
    expect(r.stdout + r.stderr).toBe('');
    expect(r.status).toBe(0);
  }, 120_000);
});
