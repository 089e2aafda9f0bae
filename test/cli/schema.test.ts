/**
 * `ratchet schema` through the real CLI: prints the JSON Schema (valid JSON, draft 2020-12), and with a
 * campaign file checks it, exit 2 and the exact message on bad input.
 */
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { spawnSync } from 'node:child_process';
import { mkdtempSync, rmSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { fileURLToPath } from 'node:url';
import { campaignJsonSchema } from '../../src/campaign/jsonschema.js';

const ROOT = fileURLToPath(new URL('../../', import.meta.url));

function cli(args: string[], cwd: string): { code: number | null; stdout: string; stderr: string } {
  const r = spawnSync(process.execPath, ['--import', join(ROOT, 'node_modules/tsx/dist/esm/index.mjs'), join(ROOT, 'src/cli/index.ts'), ...args], {
    cwd,
    encoding: 'utf8',
  });
  return { code: r.status, stdout: r.stdout, stderr: r.stderr };
}

const CAMPAIGN = `name: argon
species: [Ar]
start: start.xyz
conditions:
  - {name: c30, temperature: 30, steps: 100}
stages:
  label:
    command: ./label.sh
    resources:
      walltime: "02:00:00"
  train: {command: ./train.sh}
  validate: {command: ./validate.sh}
  simulate: {command: ./md.sh}
`;

let dir: string;
beforeAll(() => {
  dir = mkdtempSync(join(tmpdir(), 'ratchet-cli-schema-'));
  writeFileSync(join(dir, 'start.xyz'), '1\nProperties=species:S:1:pos:R:3\nAr 0 0 0\n');
  writeFileSync(join(dir, 'campaign.yaml'), CAMPAIGN);
  writeFileSync(join(dir, 'bad.yaml'), CAMPAIGN.replace('walltime: "02:00:00"', 'walltime: "-1"'));
});
afterAll(() => {
  rmSync(dir, { recursive: true, force: true });
});

describe('ratchet schema', () => {
  it('prints the campaign JSON Schema as JSON', () => {
    const r = cli(['schema'], dir);
    expect(r.code).toBe(0);
    expect(r.stderr).toBe('');
    const printed = JSON.parse(r.stdout);
    expect(printed.$schema).toBe('https://json-schema.org/draft/2020-12/schema');
    expect(printed).toEqual(campaignJsonSchema());
  });

  it('checks a good campaign file', () => {
    const r = cli(['schema', 'campaign.yaml'], dir);
    expect(r.code).toBe(0);
    expect(r.stdout).toMatch(/^campaign\.yaml: valid campaign "argon": Ar, 1 starting structure file\(s\), 1 condition\(s\), committee of 4, backend local, sha256 [0-9a-f]{12}\n$/);
  });

  it('exits 2 with file:line:col, key path and what was expected for a bad one', () => {
    const r = cli(['schema', 'bad.yaml'], dir);
    expect(r.code).toBe(2);
    expect(r.stdout).toBe('');
    expect(r.stderr).toBe(
      'ratchet: bad.yaml:10:17: stages.label.resources.walltime: expected a walltime like "02:00:00" (HH:MM:SS) or "1-12:00:00" (D-HH:MM:SS), or whole seconds, found "-1"\n',
    );
    const missing = cli(['schema', 'nope.yaml'], dir);
    expect(missing.code).toBe(2);
    expect(missing.stderr).toBe('ratchet: nope.yaml: cannot read the campaign file: no such file or directory\n');
  });
});
