/**
 * `ratchet init --example NAME DIR` (src/campaign/examples.ts): what the copy holds and how bad requests
 * are refused. The full runs of the copies are in test/examples/packed-install.test.ts (argon, from an
 * installed package) and test/examples/water-xtb.test.ts.
 */
import { existsSync, mkdirSync, mkdtempSync, readFileSync, rmSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { afterAll, describe, expect, it } from 'vitest';
import { parse } from 'yaml';
import { EXAMPLES, PACKAGE_ROOT, writeExample } from '../../src/campaign/examples.js';
import { InitError } from '../../src/campaign/starter.js';

const dirs: string[] = [];
afterAll(() => dirs.forEach((d) => rmSync(d, { recursive: true, force: true })));
function tmp(): string {
  const d = mkdtempSync(join(tmpdir(), 'ratchet-examples-'));
  dirs.push(d);
  return d;
}

describe('writeExample', () => {
  it('refuses an unknown name, naming the examples there are', async () => {
    await expect(writeExample('argonne', join(tmp(), 'x'))).rejects.toThrow(new InitError("--example: unknown example 'argonne': expected one of argon, water-xtb"));
  });

  it('refuses an argon copy when the package has no compiled programs, saying what to run', async () => {
    const fakeRoot = tmp();
    mkdirSync(join(fakeRoot, 'examples/argon'), { recursive: true });
    await expect(writeExample('argon', join(tmp(), 'x'), fakeRoot)).rejects.toThrow(/dist\/demo\/examples\/argon: the compiled argon programs are missing; run `npm run build`/);
  });

  it('rewrites every argon command to the compiled program, keeping the rest of the campaign', async () => {
    const root = tmp();
    mkdirSync(join(root, 'examples/argon'), { recursive: true });
    mkdirSync(join(root, 'dist/demo/examples/argon'), { recursive: true });
    writeFileSync(join(root, 'dist/demo/examples/argon/label.js'), '');
    const original = readFileSync(join(PACKAGE_ROOT, 'examples/argon/campaign.yaml'), 'utf8');
    writeFileSync(join(root, 'examples/argon/campaign.yaml'), original);
    for (const f of EXAMPLES.argon.files) writeFileSync(join(root, 'examples/argon', f), 'x');
    const out = join(tmp(), 'with space');
    const { campaign } = await writeExample('argon', out, root);
    const copy = parse(readFileSync(campaign, 'utf8'));
    const orig = parse(original);
    for (const stage of ['label', 'train', 'validate', 'simulate']) {
      const prog = stage === 'simulate' ? 'md' : stage;
      expect(orig.stages[stage].command).toBe(`node --import tsx "$RATCHET_CAMPAIGN_DIR/${prog}.ts"`);
      expect(copy.stages[stage].command).toBe(`node ${join(root, 'dist/demo/examples/argon', `${prog}.js`)}`);
      copy.stages[stage].command = orig.stages[stage].command;
    }
    expect(copy).toEqual(orig);
    // A second copy into the same folder is refused, naming the file in the way.
    await expect(writeExample('argon', out, root)).rejects.toThrow(`${join(out, 'campaign.yaml')}: already exists`);
  });

  it('copies water-xtb with its programs and the companion module beside the campaign', async () => {
    const out = join(tmp(), 'w');
    const { files } = await writeExample('water-xtb', out);
    for (const f of ['label.py', 'train.py', 'md.py', 'validate.py', 'model.py', 'ratchet_task.py', 'start-water.xyz', 'README.md']) {
      expect(existsSync(join(out, f)), f).toBe(true);
    }
    expect(files).toHaveLength(8);
    expect(readFileSync(join(out, 'ratchet_task.py'), 'utf8')).toBe(readFileSync(join(PACKAGE_ROOT, 'python/ratchet_task.py'), 'utf8'));
  });
});
