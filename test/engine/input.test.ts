/**
 * Bad input through the engine (exit code 2, nothing recorded) and values that must reach a command
 * intact through the rendered scripts: spaces, quotes, $(...), backticks and newlines in the campaign's
 * directory, name and parameters. (The backends' own tests cover quoting itself; this checks the path
 * through the engine: task.json, environment, run.sh, bash.)
 */
import { execFileSync } from 'node:child_process';
import { existsSync, readFileSync, readdirSync, writeFileSync, statSync } from 'node:fs';
import { join } from 'node:path';
import { afterAll, describe, expect, it } from 'vitest';
import { hostname } from 'node:os';
import { Journal } from '../../src/ledger/journal.js';
import { runCampaign } from '../../src/engine/run.js';
import { BufferOutput } from '../../src/engine/output.js';
import { makeCampaign, removeCampaigns } from './fixture.js';

async function run(file: string, extra: Record<string, unknown> = {}) {
  const out = new BufferOutput();
  const errors: string[] = [];
  const r = await runCampaign({ campaign: file, out, error: (m) => errors.push(m), ...extra });
  return { ...r, text: out.text, errors: errors.join('\n') };
}

afterAll(removeCampaigns);

describe('bad input', () => {
  it('a campaign with an unknown key: exit 2, the file and line named, no ledger', async () => {
    const { dir, file } = makeCampaign({ extraYaml: 'comittee_size: 3\n' });
    const r = await run(file);
    expect(r.exitCode).toBe(2);
    expect(r.errors).toMatch(/campaign\.yaml:\d+:\d+: comittee_size: /);
    expect(existsSync(join(dir, '.ratchet'))).toBe(false);
  });

  it('a missing start structure: exit 2, no ledger', async () => {
    const { dir, file } = makeCampaign();
    writeFileSync(file, readFileSync(file, 'utf8').replace('start: start.xyz', 'start: missing.xyz'));
    const r = await run(file);
    expect(r.exitCode).toBe(2);
    expect(r.errors).toContain('missing.xyz');
    expect(existsSync(join(dir, '.ratchet'))).toBe(false);
  });

  it('bad options: exit 2 before anything is written', async () => {
    const { dir, file } = makeCampaign();
    expect((await run(file, { until: 'r1/trian' })).errors).toContain('--stop-before: expected a round (2), a stage of a round (r1/train) or a stage (train), found "r1/trian"');
    expect((await run(file, { until: 'soon' })).exitCode).toBe(2);
    const jobs = await run(file, { jobs: '0' });
    expect(jobs.exitCode).toBe(2);
    expect(jobs.errors).toContain('--jobs: expected a whole number of at least 1, found "0"');
    const backend = await run(file, { backend: 'slurn' });
    expect(backend.exitCode).toBe(2);
    expect(backend.errors).toContain('unknown backend "slurn"');
    const retry = await run(file, { retry: 'label' });
    expect(retry.exitCode).toBe(2);
    expect(retry.errors).toContain('expected a task like r0/label/0003 or a stage like r0/label, found "label"');
    // None of them wrote a ledger event (the retry opened the journal, found the target bad, wrote nothing).
    expect(existsSync(join(dir, '.ratchet/ledger.jsonl')) ? readFileSync(join(dir, '.ratchet/ledger.jsonl'), 'utf8') : '').toBe('');
  });
});

describe('starting structures outside the campaign directory', () => {
  it('are copied into inputs/ and registered there, so every artifact lies inside the campaign', async () => {
    const { dir, file } = makeCampaign({ dirName: 'campaign' });
    const outside = join(dir, '..', `outside-${process.pid}.xyz`);
    writeFileSync(outside, readFileSync(join(dir, 'start.xyz')));
    writeFileSync(file, readFileSync(file, 'utf8').replace('start: start.xyz', `start: ${JSON.stringify(outside)}`));
    const r = await run(file, { until: 'label' });
    expect(r.errors).toBe('');
    expect(r.exitCode).toBe(0);
    const starts = readFileSync(join(dir, '.ratchet/ledger.jsonl'), 'utf8').trim().split('\n').map((l) => JSON.parse(l)).filter((e) => e.role === 'start');
    expect(starts).toHaveLength(1);
    expect(starts[0].path).toMatch(new RegExp(`^inputs/[0-9a-f]{12}-outside-${process.pid}\\.xyz$`));
    expect(readFileSync(join(dir, starts[0].path), 'utf8')).toBe(readFileSync(outside, 'utf8'));
  }, 120_000);
});

describe('another run at the same time', () => {
  it('is refused (exit 1) while a live process holds the lock, and records nothing', async () => {
    const { dir, file } = makeCampaign();
    const j = await Journal.open(dir, { handleSignals: false });
    try {
      const r = await run(file);
      expect(r.exitCode).toBe(1);
      expect(r.errors).toContain(`campaign is locked by host ${hostname()}, pid ${process.pid}`);
      expect(readFileSync(join(dir, '.ratchet/ledger.jsonl'), 'utf8')).toBe('');
    } finally {
      await j.close();
    }
  });
});

describe('awkward values reach the commands intact', () => {
  it('spaces, quotes, $(...), backticks and newlines in directory, name and parameters', async () => {
    const weird = `it's "odd" $(touch PWNED) \`touch PWNED2\` ; rm -rf nothing\nsecond line\ttab \\ back`;
    const { dir, file } = makeCampaign({
      dirName: `camp aign 'q' "dq" $(touch PWNED3) \`x\``,
      name: `name with 'quote' $(touch PWNED4) and\nnewline`,
      labelParams: { echo: weird, plain: 3 },
    });
    const r = await run(file, { until: 'train' });
    expect(r.errors).toBe('');
    expect(r.exitCode).toBe(0);
    for (const t of ['0000', '0001', '0002']) {
      const tdir = join(dir, 'rounds/r0/label', t);
      execFileSync('bash', ['-n', join(tdir, 'run.sh')]);
      expect(readFileSync(join(tdir, 'echo.txt'), 'utf8')).toBe(weird);
      expect(JSON.parse(readFileSync(join(tdir, 'task.json'), 'utf8'))).toMatchObject({ campaign: `name with 'quote' $(touch PWNED4) and\nnewline`, params: { echo: weird, plain: 3 } });
    }
    // Nothing was executed from the values: no PWNED file anywhere in the campaign or its parent.
    const found: string[] = [];
    const walk = (d: string) => {
      for (const n of readdirSync(d)) {
        if (n.startsWith('PWNED')) found.push(join(d, n));
        if (statSync(join(d, n)).isDirectory()) walk(join(d, n));
      }
    };
    walk(join(dir, '..'));
    expect(found).toEqual([]);
    expect(existsSync(join(process.cwd(), 'PWNED'))).toBe(false);
  }, 240_000);
});
