/**
 * The data behind every chart of the report, gathered from the ledger (stage verdicts and their gate
 * figures, task attempts, artifacts) and, where the ledger holds only a summary, from the files the
 * gates read (held-out predictions, validation trajectories). `ratchet report --json` writes exactly this.
 *
 * Figures are read defensively: a field another version of a gate does not write is skipped, never
 * guessed. A campaign still running or blocked gives what there is.
 *
 * Committee spreads: the committee gate records every kept frame's spread (figures.max_spread) in the
 * simulate verdict; those are used. Only when a verdict lacks them is the kept trajectory read again
 * with the same gate (src/gates/committee.ts).
 */
import { existsSync } from 'node:fs';
import { join, isAbsolute } from 'node:path';
import type { LedgerEvent } from '../ledger/journal.js';
import type { ArtifactEvent } from '../ledger/artifacts.js';
import { lineageGraph } from '../ledger/lineage.js';
import { readFrames } from '../atoms/xyz/reader.js';
import { checkCommittee } from '../gates/committee.js';
import type { StatusReport } from '../engine/status.js';
import { VERSION } from '../version.js';

export type Verdict = 'pass' | 'warn' | 'fail';

export interface ReportData {
  tool_version: string;
  campaign: { name: string; file: string; dir: string; sha256: string };
  /** converged / exhausted / blocked at rK/stage / running at rK/stage. */
  state: string;
  target: number;
  conditions: string[];
  confident: { round: number; condition: string; fraction: number | null; frames: number; confident: number; informative: number; runaway: number }[];
  spreads: { round: number; condition: string; spread_eV_per_A: number; band: string; lower: number; upper: number }[];
  windows: { round: number; lower: number; upper: number }[];
  spread_source: Record<string, 'ledger' | 'trajectory'>;
  errors: { round: number; train_frames: number | null; quantity: 'energy' | 'force'; metric: 'MAE' | 'RMSE'; element: string; value: number; unit: string }[];
  error_limits: { quantity: 'energy' | 'force'; metric: 'MAE' | 'RMSE'; warn: number | null; fail: number | null; unit: string }[];
  parity: {
    round: number | null;
    reference: string | null;
    predicted: string | null;
    forces: { element: string; reference: number; predicted: number }[];
    energies: { reference_eV_per_atom: number; predicted_eV_per_atom: number }[];
    note?: string;
  };
  drift: { round: number; task: string; label: string; slope: number | null; limit: number | null; points: { time_ps: number; energy_meV_per_atom: number }[] }[];
  counts: { round: number; labeled: number; rejected: number; held_out: number; trained: number }[];
  rejections: { round: number; reason: string; count: number }[];
  core_hours: { round: number; stage: string; hours: number }[];
  budget: { core_hours?: number; core_hours_per_round?: number; total_used: number; unknown_attempts: number };
  verdicts: { seq: number; at: string; round: number; stage: string; verdict: Verdict; gate: string; task?: string; reasons: string[]; figures: Record<string, unknown> }[];
  lineage: { round: number | null; nodes: { id: string; role: string; path: string; layer: number; row: number }[]; edges: { from: string; to: string }[]; truncated: boolean };
  cautions: string[];
  /** The campaign revisions (as status reports them), with the rounds that ran under each; absent before any was recorded. */
  revisions?: (NonNullable<StatusReport['revisions']>[number] & { rounds: number[] })[];
}

export const CAUTIONS = [
  'A converged committee is not a validated potential: convergence says the committee agrees with itself on what the campaign explored, not that it is right.',
  'It holds only for the species, structures and conditions it was explored and tested on; anything else is an extrapolation that needs its own checks.',
];

const num = (v: unknown): number | null => (typeof v === 'number' && Number.isFinite(v) ? v : null);
const obj = (v: unknown): Record<string, unknown> | null => (v && typeof v === 'object' && !Array.isArray(v) ? (v as Record<string, unknown>) : null);

interface Gated {
  seq: number;
  at: string;
  round: number;
  stage: string;
  verdict: Verdict;
  gates: { gate: string; verdict: Verdict; task?: string; reasons: string[]; figures: Record<string, unknown> }[];
  figures: Record<string, unknown>;
}

/** The latest verdict of each (round, stage), and every verdict in ledger order. */
function gatedEvents(events: LedgerEvent[]): { all: Gated[]; latest: Map<string, Gated> } {
  const all: Gated[] = [];
  const latest = new Map<string, Gated>();
  for (const e of events) {
    if (e.type !== 'stage_gated' || typeof e.round !== 'number' || typeof e.stage !== 'string') continue;
    const g: Gated = {
      seq: e.seq,
      at: e.at,
      round: e.round,
      stage: e.stage,
      verdict: e.verdict as Verdict,
      gates: (Array.isArray(e.gates) ? e.gates : []).map((x: Record<string, unknown>) => ({
        gate: String(x.gate ?? '?'),
        verdict: x.verdict as Verdict,
        ...(typeof x.task === 'string' ? { task: x.task } : {}),
        reasons: Array.isArray(x.reasons) ? x.reasons.map(String) : [],
        figures: obj(x.figures) ?? {},
      })),
      figures: obj(e.figures) ?? {},
    };
    all.push(g);
    latest.set(`${g.round}/${g.stage}`, g);
  }
  return { all, latest };
}

function conditionOf(task: string | undefined): string {
  return task ? task.split('/').slice(2).join('/') : '?';
}

function at(dir: string, p: string): string {
  return isAbsolute(p) ? p : join(dir, p);
}

export interface CollectOptions {
  /** Most nodes drawn in the lineage graph (default 200). */
  maxLineageNodes?: number;
  /** Most points per chart series read from files (parity, energy traces; default 20000). */
  maxPoints?: number;
}

/** Gather the report's data. `status` is buildStatus's answer for the same ledger. */
export async function collectReport(status: StatusReport, events: LedgerEvent[], opts: CollectOptions = {}): Promise<ReportData> {
  const dir = status.campaign.dir;
  const maxPoints = opts.maxPoints ?? 20000;
  const { all, latest } = gatedEvents(events);
  const rounds = status.rounds.map((r) => r.round);
  const get = (round: number, stage: string) => latest.get(`${round}/${stage}`);

  const state = status.ended
    ? `${status.ended.state} in round ${status.ended.round}`
    : status.blocking
      ? `blocked at ${status.blocking.stage}`
      : status.at
        ? `at r${status.at.round}/${status.at.stage}${status.running?.alive ? ' (running)' : ''}`
        : 'not started';

  // Confident fraction and spreads, from the simulate verdicts.
  const confident: ReportData['confident'] = [];
  const spreads: ReportData['spreads'] = [];
  const windows: ReportData['windows'] = [];
  const spreadSource: ReportData['spread_source'] = {};
  for (const r of rounds) {
    const g = get(r, 'simulate');
    if (!g) continue;
    const conds = obj(g.figures.conditions) ?? {};
    for (const [name, f0] of Object.entries(conds)) {
      const f = obj(f0) ?? {};
      confident.push({
        round: r,
        condition: name,
        fraction: num(f.confident_fraction),
        frames: num(f.frames) ?? 0,
        confident: num(f.confident) ?? 0,
        informative: num(f.informative) ?? 0,
        runaway: num(f.runaway) ?? 0,
      });
    }
    let win: { lower: number; upper: number } | undefined;
    for (const gate of g.gates.filter((x) => x.gate === 'committee')) {
      const w = obj(gate.figures.window);
      const lower = num(w?.lower);
      const upper = num(w?.upper);
      if (lower === null || upper === null) continue;
      win ??= { lower, upper };
      const cond = conditionOf(gate.task);
      let values: (number | null)[] | null = Array.isArray(gate.figures.max_spread) ? (gate.figures.max_spread as (number | null)[]) : null;
      let bands: unknown[] = Array.isArray(gate.figures.band) ? (gate.figures.band as unknown[]) : [];
      spreadSource[`r${r}/${cond}`] = 'ledger';
      if (!values && gate.task) {
        const tdir = join(dir, 'rounds', gate.task);
        const file = [join(tdir, 'trajectory.kept.xyz'), join(tdir, 'trajectory.xyz')].find((p) => existsSync(p));
        if (file) {
          try {
            const c = await checkCommittee([file], { lower, upper });
            values = c.figures.max_spread;
            bands = c.figures.band;
            spreadSource[`r${r}/${cond}`] = 'trajectory';
          } catch {
            values = null;
          }
        }
      }
      (values ?? []).forEach((v, i) => {
        if (typeof v === 'number' && Number.isFinite(v)) spreads.push({ round: r, condition: cond, spread_eV_per_A: v, band: String(bands[i] ?? (v < lower ? 'confident' : v < upper ? 'informative' : 'runaway')), lower, upper });
      });
    }
    const sw = obj(g.figures.window);
    if (!win && num(sw?.lower) !== null && num(sw?.upper) !== null) win = { lower: num(sw?.lower)!, upper: num(sw?.upper)! };
    if (win) windows.push({ round: r, ...win });
  }

  // Counts and rejections, from the label verdicts (train/test counts there are cumulative).
  const counts: ReportData['counts'] = [];
  const rejections: ReportData['rejections'] = [];
  const trainFrames = new Map<number, number>();
  let prevTest = 0;
  for (const r of rounds) {
    const g = get(r, 'label');
    if (!g) continue;
    const lab = g.gates.find((x) => x.gate === 'labels')?.figures ?? {};
    const f = { ...lab, ...g.figures };
    const train = num(f.train_frames);
    const test = num(f.test_frames);
    if (train !== null) trainFrames.set(r, train);
    counts.push({
      round: r,
      labeled: num(f.accepted) ?? 0,
      rejected: num(f.rejected_count) ?? num(f.rejected) ?? 0,
      held_out: test !== null ? test - prevTest : 0,
      trained: train ?? 0,
    });
    if (test !== null) prevTest = test;
    const why = new Map<string, number>();
    for (const x of Array.isArray(lab.rejected) ? lab.rejected : []) {
      const reason = String(obj(x)?.reason ?? x).replace(/^frame \d+:\s*/, '').replace(/\d+(\.\d+)?(e-?\d+)?/g, '#').slice(0, 120);
      why.set(reason, (why.get(reason) ?? 0) + 1);
    }
    for (const [reason, count] of why) rejections.push({ round: r, reason, count });
  }

  // Errors of each round's committee on the held-out frames (validate: errors gate).
  const errors: ReportData['errors'] = [];
  let errorLimits: ReportData['error_limits'] = [];
  for (const r of rounds) {
    const g = get(r, 'validate');
    const f = g?.gates.find((x) => x.gate === 'errors')?.figures;
    if (!f) continue;
    const tf = trainFrames.get(r) ?? null;
    const push = (quantity: 'energy' | 'force', metric: 'MAE' | 'RMSE', element: string, v: unknown) => {
      const value = num(v);
      if (value !== null) errors.push({ round: r, train_frames: tf, quantity, metric, element, value, unit: quantity === 'energy' ? 'meV/atom' : 'meV/Å' });
    };
    push('energy', 'MAE', 'all', f.energy_mae_meV_per_atom);
    push('energy', 'RMSE', 'all', f.energy_rmse_meV_per_atom);
    push('force', 'MAE', 'all', f.force_mae_meV_per_A);
    push('force', 'RMSE', 'all', f.force_rmse_meV_per_A);
    for (const [el, pe] of Object.entries(obj(f.per_element) ?? {})) {
      const p = obj(pe) ?? {};
      push('force', 'MAE', el, p.force_mae_meV_per_A);
      push('force', 'RMSE', el, p.force_rmse_meV_per_A);
      push('energy', 'MAE', el, p.energy_mae_meV_per_atom);
      push('energy', 'RMSE', el, p.energy_rmse_meV_per_atom);
    }
    const lim = obj(f.limits);
    if (lim) {
      errorLimits = [];
      for (const [key, quantity, metric] of [
        ['energy_mae', 'energy', 'MAE'],
        ['energy_rmse', 'energy', 'RMSE'],
        ['force_mae', 'force', 'MAE'],
        ['force_rmse', 'force', 'RMSE'],
      ] as const) {
        const l = obj(lim[key]);
        if (l && (num(l.warn) !== null || num(l.fail) !== null)) {
          errorLimits.push({ quantity, metric, warn: num(l.warn), fail: num(l.fail), unit: quantity === 'energy' ? 'meV/atom' : 'meV/Å' });
        }
      }
    }
  }

  // Parity of the latest committee's held-out predictions.
  const parity: ReportData['parity'] = { round: null, reference: null, predicted: null, forces: [], energies: [] };
  for (const r of [...rounds].reverse()) {
    const pred = join(dir, 'rounds', `r${r}`, 'validate', 'errors', 'predictions.xyz');
    const ref = join(dir, 'rounds', `r${r}`, 'label', 'test.xyz');
    if (!existsSync(pred) || !existsSync(ref)) continue;
    Object.assign(parity, { round: r, reference: `rounds/r${r}/label/test.xyz`, predicted: `rounds/r${r}/validate/errors/predictions.xyz` });
    try {
      await readParity(ref, pred, parity, maxPoints);
    } catch (err) {
      parity.note = `could not read the held-out frames: ${(err as Error).message}`;
    }
    break;
  }

  // Energy traces of every validation constant-energy run.
  const drift: ReportData['drift'] = [];
  for (const r of rounds) {
    const g = get(r, 'validate');
    for (const gate of g?.gates.filter((x) => x.gate === 'drift') ?? []) {
      const f = gate.figures;
      const slope = num(f.slope_meV_per_atom_per_ps);
      const limit = num(obj(obj(f.limits)?.max_drift)?.fail);
      const se = num(f.slope_se_meV_per_atom_per_ps);
      const files = Array.isArray(f.files) ? f.files.map((x) => String(obj(x)?.path ?? '')).filter(Boolean) : [];
      const file = files[0] ? at(dir, files[0]) : gate.task ? join(dir, 'rounds', gate.task, 'trajectory.xyz') : '';
      const label =
        `r${r} ${conditionOf(gate.task)}: slope ${slope === null ? 'n/a' : slope.toPrecision(3)}` +
        (se !== null ? ` ± ${se.toPrecision(2)}` : '') +
        ` meV/atom/ps (limit ${limit ?? 'none'})`;
      const points = file && existsSync(file) ? await readEnergyTrace(file, maxPoints).catch(() => []) : [];
      drift.push({ round: r, task: gate.task ?? '?', label, slope, limit, points });
    }
  }

  // Core-hours per stage and round.
  const coreHours: ReportData['core_hours'] = [];
  for (const [key, hours] of Object.entries(status.core_hours.by_stage)) {
    const m = /^r(\d+)\/(\w+)$/.exec(key);
    if (m) coreHours.push({ round: Number(m[1]), stage: m[2], hours });
  }

  const verdicts: ReportData['verdicts'] = [];
  for (const g of all) {
    for (const x of g.gates) verdicts.push({ seq: g.seq, at: g.at, round: g.round, stage: g.stage, verdict: x.verdict, gate: x.gate, ...(x.task ? { task: x.task } : {}), reasons: x.reasons, figures: x.figures });
    if (g.gates.length === 0) verdicts.push({ seq: g.seq, at: g.at, round: g.round, stage: g.stage, verdict: g.verdict, gate: '(stage)', reasons: [], figures: g.figures });
  }

  const revisions = status.revisions?.map((v) => ({
    ...v,
    rounds: status.rounds.filter((r) => (r.revisions ?? (r.revision !== undefined ? [r.revision] : [])).includes(v.number)).map((r) => r.round),
  }));

  return {
    ...(revisions ? { revisions } : {}),
    tool_version: VERSION,
    campaign: { name: status.campaign.name, file: status.campaign.file, dir, sha256: status.campaign.sha256 },
    state,
    target: status.target,
    conditions: status.conditions,
    confident,
    spreads,
    windows,
    spread_source: spreadSource,
    errors,
    error_limits: errorLimits,
    parity,
    drift,
    counts,
    rejections,
    core_hours: coreHours,
    budget: { ...status.core_hours.budget, total_used: status.core_hours.total, unknown_attempts: status.core_hours.unknown_attempts },
    verdicts,
    lineage: committeeLineage(events, opts.maxLineageNodes ?? 200),
    cautions: CAUTIONS,
  };
}

async function readParity(ref: string, pred: string, out: ReportData['parity'], maxPoints: number): Promise<void> {
  const refs = readFrames(ref, { columns: ['forces'], positions: false });
  const preds = readFrames(pred, { columns: ['forces'], positions: false });
  for (;;) {
    const [a, b] = await Promise.all([refs.next(), preds.next()]);
    if (a.done || b.done) break;
    const fa = a.value;
    const fb = b.value;
    const n = fa.species.length;
    const ea = num(fa.info.get('energy'));
    const eb = num(fb.info.get('energy'));
    if (ea !== null && eb !== null && n > 0) out.energies.push({ reference_eV_per_atom: ea / n, predicted_eV_per_atom: eb / n });
    const ca = fa.arrays.get('forces');
    const cb = fb.arrays.get('forces');
    if (!ca || !cb || fb.species.length !== n || out.forces.length >= maxPoints) continue;
    for (let k = 0; k < 3 * n && out.forces.length < maxPoints; k++) {
      out.forces.push({ element: fa.species[Math.floor(k / 3)], reference: Number(ca.values[k]), predicted: Number(cb.values[k]) });
    }
  }
}

async function readEnergyTrace(file: string, maxPoints: number): Promise<{ time_ps: number; energy_meV_per_atom: number }[]> {
  const pts: { time_ps: number; energy_meV_per_atom: number }[] = [];
  let e0: number | null = null;
  let i = 0;
  for await (const fr of readFrames(file, { columns: [], positions: false })) {
    const e = num(fr.info.get('total_energy')) ?? num(fr.info.get('energy'));
    const t = num(fr.info.get('time'));
    const n = fr.species.length;
    if (e !== null && n > 0 && pts.length < maxPoints) {
      e0 ??= e / n;
      pts.push({ time_ps: t !== null ? t / 1000 : i, energy_meV_per_atom: (e / n - e0) * 1000 });
    }
    i++;
  }
  return pts;
}

/**
 * The upstream graph of the latest committee's models, laid out in layers (layer 0 = the models):
 * breadth-first from the models over recorded inputs and frame sources, the `maxNodes` nearest kept.
 */
export function committeeLineage(events: LedgerEvent[], maxNodes: number): ReportData['lineage'] {
  const g = lineageGraph(events);
  let round: number | null = null;
  const models: ArtifactEvent[] = [];
  for (const a of g.byPath.values()) {
    if (a.role !== 'model' || typeof a.task !== 'string') continue;
    const m = /^r(\d+)\//.exec(a.task);
    if (!m) continue;
    const r = Number(m[1]);
    if (round === null || r > round) {
      round = r;
      models.length = 0;
    }
    if (r === round) models.push(a);
  }
  const nodes = new Map<string, { id: string; role: string; path: string; layer: number; row: number }>();
  const edges: { from: string; to: string }[] = [];
  let truncated = false;
  let frontier = models.map((m) => m.id).filter((id, i, all) => all.indexOf(id) === i);
  for (let layer = 0; frontier.length && !truncated; layer++) {
    const next: string[] = [];
    for (const id of frontier) {
      if (nodes.has(id)) continue;
      if (nodes.size >= maxNodes) {
        truncated = true;
        break;
      }
      const a = g.byId.get(id);
      nodes.set(id, { id, role: a?.role ?? 'not recorded', path: a?.path ?? id.slice(0, 19), layer, row: 0 });
      if (!a) continue;
      const ins = [...(Array.isArray(a.inputs) ? a.inputs : []), ...(Array.isArray(a.frame_sources) ? a.frame_sources : [])];
      for (const i of new Set(ins)) {
        if (typeof i !== 'string') continue;
        edges.push({ from: i, to: id });
        next.push(i);
      }
    }
    frontier = next;
  }
  if (frontier.some((id) => !nodes.has(id))) truncated = true;
  const seen = new Set<string>();
  const kept = edges.filter((e) => {
    const key = `${e.from}>${e.to}`;
    if (!nodes.has(e.from) || !nodes.has(e.to) || seen.has(key)) return false;
    seen.add(key);
    return true;
  });
  const rows = new Map<number, number>();
  for (const n of nodes.values()) {
    n.row = rows.get(n.layer) ?? 0;
    rows.set(n.layer, n.row + 1);
  }
  return { round, nodes: [...nodes.values()], edges: kept, truncated };
}
