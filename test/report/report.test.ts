/**
 * `ratchet report` on a real two-round campaign (the engine fixture, local backend, invented stage
 * programs): the data behind each chart against the ledger's verdicts and against the files read by
 * an independent library (Debian's ASE), then the page itself opened in a real headless Chromium
 * (Debian's `chromium`, driven by puppeteer-core): every chart present and drawn, no console error,
 * no request leaving the page, a screenshot kept in test-artifacts/report.png.
 */
import { execFileSync } from 'node:child_process';
import { existsSync, mkdirSync, writeFileSync } from 'node:fs';
import { join } from 'node:path';
import { pathToFileURL } from 'node:url';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { buildReport, type Report } from '../../src/report/index.js';
import { ledgerEvents, makeCampaign, removeCampaigns, REPO, twoRoundCampaign } from '../engine/fixture.js';

afterAll(removeCampaigns);

const CHROMIUM = ['/usr/bin/chromium', '/usr/bin/chromium-browser', '/usr/bin/google-chrome'].find((p) => existsSync(p));
const ARTIFACTS = join(REPO, 'test-artifacts');

function python(code: string, ...args: string[]): string {
  return execFileSync('/usr/bin/python3', ['-c', code, ...args], { encoding: 'utf8' });
}

describe('the report of a two-round campaign', () => {
  let dir = '';
  let file = '';
  let events: Record<string, any>[] = [];
  let report: Report;

  beforeAll(async () => {
    ({ dir, file } = await twoRoundCampaign());
    events = ledgerEvents(dir);
    report = await buildReport(file, { generatedAt: '2026-01-01T00:00:00Z' });
    mkdirSync(ARTIFACTS, { recursive: true });
    writeFileSync(join(ARTIFACTS, 'report.html'), report.html);
  }, 240_000);

  const gated = (stage: string) => events.filter((e) => e.type === 'stage_gated' && e.stage === stage);

  it('draws every chart of a campaign that reached simulate twice', () => {
    expect(report.charts.map((c) => c.id)).toEqual([
      'confident',
      'spread',
      'errors_round',
      'errors_frames',
      'parity_forces',
      'parity_energy',
      'drift',
      'counts',
      'core_hours',
      'core_hours_total',
      'lineage',
    ]);
    for (const c of report.charts) expect(c.svg, `${c.id}: ${c.empty}`).toMatch(/^<svg/);
  });

  it('plots the confident fraction and every kept frame\'s spread as the simulate verdicts record them', () => {
    const sim = gated('simulate');
    expect(sim.length).toBe(2);
    for (const g of sim) {
      for (const [name, f] of Object.entries<any>(g.figures.conditions)) {
        const row = report.data.confident.find((c) => c.round === g.round && c.condition === name)!;
        expect(row.fraction).toBe(f.confident_fraction);
        expect(report.data.spreads.filter((s) => s.round === g.round && s.condition === name)).toHaveLength(f.frames);
      }
      const com = g.gates.filter((x: any) => x.gate === 'committee');
      for (const c of com) {
        const cond = c.task.split('/')[2];
        const mine = report.data.spreads.filter((s) => s.round === g.round && s.condition === cond);
        expect(mine.map((s) => s.spread_eV_per_A)).toEqual(c.figures.max_spread);
        expect(mine.every((s) => s.lower === c.figures.window.lower && s.upper === c.figures.window.upper)).toBe(true);
      }
    }
    expect(report.data.target).toBe(0.9);
  });

  it('plots the errors gate figures against the round and the training-set size', () => {
    for (const g of gated('validate')) {
      const f = g.gates.find((x: any) => x.gate === 'errors').figures;
      const at = (q: string, m: string) => report.data.errors.find((e) => e.round === g.round && e.quantity === q && e.metric === m && e.element === 'all')!;
      expect(at('force', 'RMSE').value).toBe(f.force_rmse_meV_per_A);
      expect(at('energy', 'MAE').value).toBe(f.energy_mae_meV_per_atom);
      const label = gated('label').find((l) => l.round === g.round);
      expect(at("force", "RMSE").train_frames).toBe(label!.figures.train_frames);
    }
    expect(report.data.error_limits.find((l) => l.quantity === 'force' && l.metric === 'RMSE')).toBeTruthy();
  });

  it('parity points are the held-out frames\' force components as ASE reads them', () => {
    const p = report.data.parity;
    expect(p.round).toBe(1);
    const code = `
import sys, json
from ase.io import read
ref = read(sys.argv[1], index=':'); pred = read(sys.argv[2], index=':')
out = []
for a, b in zip(ref, pred):
    fa = a.arrays.get('forces', None)
    if fa is None: fa = a.get_forces()
    fb = b.arrays.get('forces', None)
    if fb is None: fb = b.get_forces()
    for i, s in enumerate(a.get_chemical_symbols()):
        for k in range(3): out.append([s, float(fa[i][k]), float(fb[i][k])])
print(json.dumps(out))`;
    const ase = JSON.parse(python(code, join(dir, p.reference!), join(dir, p.predicted!))) as [string, number, number][];
    expect(p.forces.length).toBe(ase.length);
    ase.forEach(([el, r, q], i) => {
      expect(p.forces[i].element).toBe(el);
      expect(p.forces[i].reference).toBeCloseTo(r, 9);
      expect(p.forces[i].predicted).toBeCloseTo(q, 9);
    });
  });

  it('counts, core-hours, verdicts and lineage match the ledger', () => {
    const label = gated('label');
    expect(report.data.counts.map((c) => c.labeled)).toEqual(label.map((l) => l.figures.accepted));
    expect(report.data.counts.at(-1)!.trained).toBe(label.at(-1)!.figures.train_frames);
    expect(report.data.counts.reduce((n, c) => n + c.held_out, 0)).toBe(label.at(-1)!.figures.test_frames);
    // Core-hours: exit records' end - start times cpus (src/backends/budget.ts), summed.
    const sum = report.data.core_hours.reduce((n, c) => n + c.hours, 0);
    expect(sum).toBeCloseTo(report.data.budget.total_used, 5); // status rounds each figure to 1e-6
    const gates = events.filter((e) => e.type === 'stage_gated').reduce((n, e) => n + Math.max(1, e.gates.length), 0);
    expect(report.data.verdicts).toHaveLength(gates);
    expect(report.data.drift.length).toBe(gated('validate').reduce((n, g) => n + g.gates.filter((x: any) => x.gate === 'drift').length, 0));
    const models = events.filter((e) => e.type === 'artifact' && e.role === 'model' && e.task.startsWith('r1/'));
    expect(models).toHaveLength(2);
    const ids = new Set(report.data.lineage.nodes.map((n) => n.id));
    for (const m of models) expect(ids.has(m.id)).toBe(true);
    const start = events.find((e) => e.type === 'artifact' && e.role === 'start');
    expect(ids.has(start!.id)).toBe(true);
    expect(report.html).toContain('not a validated potential');
    // The revision the campaign ran under, from its campaign_revision event, with the rounds run under it.
    const rev = events.find((e) => e.type === 'campaign_revision');
    expect(rev).toBeDefined();
    expect(report.html).toMatch(new RegExp(`<tr><td>1</td><td><code>${rev!.sha256.slice(0, 12)}</code></td><td>r0</td>.*<td>r0, r1</td></tr>`));
  });

  it.skipIf(!CHROMIUM)('opens in headless Chromium with every chart drawn, no console error and no request leaving the page', async () => {
    const puppeteer = (await import('puppeteer-core')).default;
    const browser = await puppeteer.launch({ executablePath: CHROMIUM!, headless: true, args: ['--no-sandbox', '--disable-gpu', '--disable-dev-shm-usage'] });
    try {
      const page = await browser.newPage();
      const consoleErrors: string[] = [];
      const requests: string[] = [];
      page.on('console', (m) => {
        if (m.type() === 'error') consoleErrors.push(m.text());
      });
      page.on('pageerror', (e) => consoleErrors.push(String(e)));
      await page.setRequestInterception(true);
      const url = pathToFileURL(join(ARTIFACTS, 'report.html')).href;
      page.on('request', (r) => {
        if (r.url() === url) return void r.continue();
        requests.push(r.url());
        void r.abort();
      });
      await page.setViewport({ width: 1280, height: 900 });
      await page.goto(url, { waitUntil: 'load' });
      const figs = await page.$$eval('figure[data-chart]', (fs) =>
        fs.map((f) => {
          const svg = f.querySelector('svg');
          const box = svg?.getBoundingClientRect();
          return {
            id: f.getAttribute('data-chart'),
            w: box?.width ?? 0,
            h: box?.height ?? 0,
            marks: svg ? svg.querySelectorAll('path, line, rect, circle, text').length : 0,
          };
        }),
      );
      expect(figs.map((f) => f.id)).toEqual(report.charts.map((c) => c.id));
      for (const f of figs) {
        expect(f.w, f.id!).toBeGreaterThan(50);
        expect(f.h, f.id!).toBeGreaterThan(50);
        expect(f.marks, f.id!).toBeGreaterThan(10);
      }
      expect(await page.$$eval('table[data-table="verdicts"] tr', (r) => r.length)).toBe(report.data.verdicts.length + 1);
      expect(consoleErrors).toEqual([]);
      expect(requests).toEqual([]);
      await page.screenshot({ path: join(ARTIFACTS, 'report.png') as `${string}.png`, fullPage: true });
      expect(existsSync(join(ARTIFACTS, 'report.png'))).toBe(true);
    } finally {
      await browser.close();
    }
  }, 120_000);

  it.runIf(!CHROMIUM)('browser check skipped: no Chromium found at /usr/bin/chromium (install Debian\'s chromium)', () => {
    expect(CHROMIUM).toBeUndefined();
  });
});

describe('the report of a campaign that has not run yet', () => {
  it('is written, with every chart saying why it has no data', async () => {
    const { file } = makeCampaign();
    const r = await buildReport(file);
    expect(r.charts.length).toBe(11);
    for (const c of r.charts) {
      expect(c.svg).toBeNull();
      expect(c.empty).toMatch(/yet/);
      expect(r.html).toContain(`data-chart="${c.id}" data-empty="true"`);
    }
    expect(r.data.state).toBe('at r0/sample');
  });
});
