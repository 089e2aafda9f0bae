/**
 * `ratchet status`: where a campaign stands, from its ledger folded into the campaign state (read
 * only, no lock): rounds by stages with task counts, gate verdicts with their figures, the confident
 * fraction per condition per round, what blocks and what to do next.
 */
import { hostname } from 'node:os';
import { foldLedger, LedgerError } from '../ledger/journal.js';
import { processState, readLock } from '../ledger/lock.js';
import { CampaignError, loadCampaign } from '../campaign/load.js';
import type { Outcome } from './advance.js';
import { pad } from './advance.js';
import { STAGES, stageId, type Stage } from './ids.js';
import type { Output } from './output.js';
import { describeOutcome } from './run.js';
import type { ConditionFigures } from './stages/simulate.js';
import { applyEvent, emptyState, frontier, isWaiting, summarizeStage, taskPhase, type CampaignState, type StagePhase, type TaskPhase } from './state.js';
import { identityProblem } from './identity.js';
import { campaignView, type CampaignView } from './view.js';
import { usage } from './attempts.js';
import { describeHold } from './stop.js';
import type { RoundCalibration } from './calibrate.js';
import { shellQuote } from '../backends/shell.js';

export interface StageStatus {
  stage: Stage;
  phase: StagePhase;
  tasks: number;
  /** Tasks by the state of their current attempt. */
  counts: Partial<Record<TaskPhase, number>>;
  /** Attempts made in all (a task run twice counts 2). */
  attempts: number;
  /** Of the started tasks not yet ended (counts.submitted): those seen running ... */
  running: number;
  /** ... and those waiting for a free slot (local --jobs) or in the scheduler's queue. */
  waiting: number;
  verdict?: 'pass' | 'warn' | 'fail';
  reasons?: string[];
  figures?: Record<string, unknown>;
  gates?: { gate: string; verdict: string; task?: string; reasons: string[] }[];
  summary?: string;
}

export interface RoundStatus {
  round: number;
  stages: StageStatus[];
  /** From the simulate gate: frames and bands per condition, with the confident fraction. */
  conditions?: Record<string, ConditionFigures>;
  /** From the label gate (round 1 on): true force error / committee spread on the frames labeled (src/engine/calibrate.ts). */
  calibration?: RoundCalibration;
  /** The round's validation failed and it explored anyway (rounds.explore_unvalidated): it cannot converge. */
  unvalidated?: { reason: string; at: string };
  /** The campaign revision in force when the round's first stage was planned (absent before revisions were recorded). */
  revision?: number;
  /** Every revision its stages were planned under, when more than one. */
  revisions?: number[];
}

export interface StatusReport {
  campaign: {
    name: string;
    file: string;
    dir: string;
    sha256: string;
    /** The campaign file that owns the folder's state, as the ledger records it (absent: not recorded yet). */
    recorded?: { name: string; file: string; path: string; adopted?: true };
  };
  /** A ratchet process holding the campaign's lock now. */
  running: { host?: string; pid?: number; started?: string; command?: string; alive: boolean | null } | null;
  ledger: { events: number; torn_line?: number };
  /** The first stage that has not passed (null once the campaign ended). */
  at: { round: number; stage: Stage } | null;
  ended?: { state: 'converged' | 'exhausted'; round: number; reasons: string[]; holding: string[] };
  rounds: RoundStatus[];
  target: number;
  conditions: string[];
  blocking?: { stage: string; why: 'tasks' | 'gate' | 'held'; reasons: string[]; next: string[] };
  /** Tasks a person stopped (ratchet stop) or cancelled with the scheduler's own command: never started again until released. */
  held?: { task: string; how: 'stop' | 'cancelled'; by?: string; reason: string; at: string; release: string }[];
  last_run?: { command: string; started: string; outcome?: string; exit_code?: number; ended?: string };
  /** Core-hours used (exit records' end - start x cpus), by round ("r0") and stage ("r0/label"), and the budget. */
  /** The recorded versions of the campaign file (campaign_revision), oldest first; absent before any was recorded. */
  revisions?: {
    number: number;
    sha256: string;
    /** The round it came into force at. */
    round: number;
    changes: number;
    affects_data: string[];
    /** The person's choice, when the revision affected data already made. */
    decision?: { choice: 'accept' | 'relabel'; by: string; round: number };
    /** Waits for --accept-revision or --relabel. */
    pending?: true;
  }[];
  core_hours: { total: number; by_round: Record<string, number>; by_stage: Record<string, number>; unknown_attempts: number; budget: { core_hours?: number; core_hours_per_round?: number } };
}

/** Fold a campaign's ledger into its state (streaming; the reducer is O(1) per event). */
export async function foldCampaign(dir: string): Promise<{ state: CampaignState; torn?: { line: number } }> {
  const r = await foldLedger(dir, applyEvent, emptyState());
  return r.torn ? { state: r.state, torn: { line: r.torn.line } } : { state: r.state };
}

export function buildStatus(view: CampaignView, state: CampaignState, campaignArg: string): StatusReport {
  const rounds: RoundStatus[] = state.rounds.map((rr) => {
    const stages: StageStatus[] = [];
    for (const stage of STAGES) {
      const st = rr.stages[stage];
      const sum = summarizeStage(st, { attempts: view.stages[stage].attempts });
      const s: StageStatus = {
        stage,
        phase: sum.phase,
        tasks: st?.tasks.length ?? 0,
        counts: sum.counts,
        attempts: st ? st.tasks.reduce((n, t) => n + t.attempts.filter((a) => a.job_id !== undefined || a.ended).length, 0) : 0,
        running: 0,
        waiting: 0,
      };
      for (const t of sum.running) {
        if (taskPhase(t) !== 'submitted') continue;
        if (isWaiting(t)) s.waiting++;
        else s.running++;
      }
      if (st?.gate) {
        s.verdict = st.gate.verdict;
        s.reasons = st.gate.reasons;
        if (st.gate.figures) s.figures = st.gate.figures;
        if (st.gate.summary) s.summary = st.gate.summary;
        s.gates = st.gate.gates.map((g) => ({ gate: g.gate, verdict: g.verdict, ...(g.task ? { task: g.task } : {}), reasons: g.reasons }));
      }
      stages.push(s);
    }
    const out: RoundStatus = { round: rr.round, stages };
    const sim = rr.stages.simulate?.gate?.figures?.conditions as Record<string, ConditionFigures> | undefined;
    if (sim) out.conditions = sim;
    const cal = rr.stages.label?.gate?.figures?.calibration as RoundCalibration | undefined;
    if (cal) out.calibration = cal;
    const waived = rr.stages.validate?.waived;
    if (waived) out.unvalidated = { reason: waived.reason, at: waived.at };
    const revs = [...new Set(STAGES.map((k) => rr.stages[k]?.revision).filter((n): n is number => n !== undefined))];
    if (revs.length) out.revision = revs[0];
    if (revs.length > 1) out.revisions = revs;
    return out;
  });
  const report: StatusReport = {
    campaign: {
      name: view.name,
      file: campaignArg,
      dir: view.dir,
      sha256: view.sha256,
      ...(state.identity
        ? { recorded: { name: state.identity.name, file: state.identity.file, path: state.identity.path, ...(state.identity.adopted ? { adopted: true as const } : {}) } }
        : {}),
    },
    running: null,
    ledger: { events: state.events },
    at: state.ended ? null : frontier(state),
    rounds,
    target: view.target,
    conditions: view.conditions.map((c) => c.name),
    core_hours: coreHours(view, state),
  };
  if (state.revisions.length) {
    const last = state.revisions[state.revisions.length - 1];
    report.revisions = state.revisions.map((r) => ({
      number: r.number,
      sha256: r.sha256,
      round: r.round,
      changes: r.changes.length,
      affects_data: r.affects_data,
      ...(r.decided ? { decision: { choice: r.decided.choice, by: r.decided.by, round: r.decided.round } } : {}),
      ...(r === last && r.decision_needed && !r.decided ? { pending: true as const } : {}),
    }));
  }
  if (state.ended) {
    report.ended = { state: state.ended.state, round: state.ended.round, reasons: state.ended.reasons, holding: state.ended.holding };
  }
  if (state.lastRun) {
    const { started, ended } = state.lastRun;
    report.last_run = { command: started.command, started: started.at };
    if (ended) Object.assign(report.last_run, { outcome: ended.outcome, exit_code: ended.exit_code, ended: ended.at });
  }
  if (report.at) {
    const { round, stage } = report.at;
    const st = state.rounds[round]?.stages[stage];
    const sum = summarizeStage(st, { attempts: view.stages[stage].attempts });
    let o: Outcome | undefined;
    if (sum.phase === 'failed') {
      o = {
        kind: 'blocked',
        round,
        stage,
        why: 'tasks',
        tasks: sum.failed.map((t) => t.id),
        reasons: sum.failed.map((t) => {
          const a = t.attempts[t.attempts.length - 1];
          return `${t.id}: ${(a.ended?.state !== 'failed' ? a.blocked : undefined) ?? a.ended?.reason ?? 'failed'}`;
        }),
      };
    } else if (sum.phase === 'blocked') {
      o = { kind: 'blocked', round, stage, why: 'gate', tasks: [], reasons: st?.gate?.reasons ?? [] };
    } else if (sum.phase === 'held') {
      o = { kind: 'blocked', round, stage, why: 'held', tasks: sum.held.map((t) => t.id), reasons: sum.held.map(describeHold) };
    }
    if (o && o.kind === 'blocked') {
      const lines = describeOutcome(o, campaignArg);
      report.blocking = { stage: stageId(round, stage), why: o.why, reasons: o.reasons, next: lines.filter((l) => /^\s*(next:|\()/.test(l)).map((l) => l.trim()) };
    }
  }
  const held = [...state.tasks.values()].filter((t) => t.held);
  if (held.length) {
    report.held = held.map((t) => ({
      task: t.id,
      how: t.held!.how,
      ...(t.held!.by ? { by: t.held!.by } : {}),
      reason: t.held!.reason,
      at: t.held!.at,
      release: `ratchet retry ${shellQuote(campaignArg)} ${t.id}`,
    }));
  }
  return report;
}

export interface StatusResult {
  exitCode: number;
  report?: StatusReport;
}

/** Load the campaign and fold its ledger. Exit code 2 for a campaign or ledger that cannot be read. */
export async function campaignStatus(campaignArg: string, error: (m: string) => void): Promise<StatusResult> {
  let view: CampaignView;
  try {
    view = campaignView(await loadCampaign(campaignArg, { checkFiles: false }));
  } catch (err) {
    if (err instanceof CampaignError) {
      error(err.message);
      return { exitCode: 2 };
    }
    throw err;
  }
  let folded;
  try {
    folded = await foldCampaign(view.dir);
  } catch (err) {
    if (err instanceof LedgerError) {
      error(err.message);
      return { exitCode: 2 };
    }
    throw err;
  }
  // One state per campaign file: another campaign file's folder is not this campaign's status.
  const other = identityProblem(view, folded.state.identity);
  if (other) {
    error(other);
    return { exitCode: 2 };
  }
  const report = buildStatus(view, folded.state, campaignArg);
  if (folded.torn) report.ledger.torn_line = folded.torn.line;
  const lock = await readLock(view.dir);
  if (lock) {
    const alive = lock.host === hostname() && typeof lock.pid === 'number' ? processState(lock.pid) === 'alive' : null;
    report.running = { host: lock.host, pid: lock.pid, started: lock.started, command: lock.command, alive };
  }
  return { exitCode: 0, report };
}

const CELL = 14;

/** The report as text for a terminal or a log. */
export function formatStatus(r: StatusReport, out: Output): void {
  out.line(`campaign ${r.campaign.name} (${r.campaign.file})`);
  let ledger = `ledger: ${r.ledger.events} event${r.ledger.events === 1 ? '' : 's'}`;
  if (r.ledger.torn_line !== undefined) ledger += ` (line ${r.ledger.torn_line} was cut short by a crash; the next run sets it aside)`;
  if (r.last_run) {
    ledger += `; last ${r.last_run.command} started ${r.last_run.started}`;
    if (r.last_run.outcome) ledger += `, ${r.last_run.outcome} (exit ${r.last_run.exit_code})`;
  }
  out.line(ledger);
  if (r.running) {
    if (r.running.alive === false) out.line(`lock: left by pid ${r.running.pid}, which is no longer running (the next run takes it over)`);
    else out.line(`running now: pid ${r.running.pid} on ${r.running.host} since ${r.running.started}`);
  }
  if (r.rounds.length === 0) {
    out.line('nothing has run yet; start with: ratchet run --dry-run ' + r.campaign.file);
    return;
  }
  out.line('');
  out.line(pad('round', 7) + STAGES.map((s) => pad(s, CELL)).join(''));
  for (const rr of r.rounds) {
    out.line(pad(`r${rr.round}`, 7) + rr.stages.map((s) => cellText(out, s)).join(''));
  }
  const verdicts: string[] = [];
  for (const rr of r.rounds) {
    for (const s of rr.stages) {
      if (!s.verdict) continue;
      const first = s.reasons?.length ? s.reasons[0] : s.summary ?? (s.gates ?? []).flatMap((g) => g.reasons).find(Boolean) ?? '';
      verdicts.push(`  ${pad(stageId(rr.round, s.stage), 14)}${out.word(s.verdict)}${' '.repeat(6 - s.verdict.length)}${oneLine(first)}`);
    }
  }
  if (verdicts.length) {
    out.line('');
    out.line('gates:');
    for (const v of verdicts) out.line(v);
  }
  const withConditions = r.rounds.filter((rr) => rr.conditions);
  if (withConditions.length) {
    out.line('');
    out.line(`confident fraction per condition (target ${r.target}):`);
    const width = Math.max(10, ...r.conditions.map((c) => c.length + 2));
    out.line(pad('', 7) + r.conditions.map((c) => pad(c, width)).join(''));
    for (const rr of withConditions) {
      out.line(
        pad(`r${rr.round}`, 7) +
          r.conditions
            .map((c) => {
              const f = rr.conditions![c];
              const v = f?.confident_fraction;
              const cut = f?.truncated ? ' cut' : '';
              return pad((v === null || v === undefined ? '-' : v.toFixed(3)) + cut, width);
            })
            .join(''),
      );
    }
    if (withConditions.some((rr) => Object.values(rr.conditions!).some((f) => f.truncated)))
      out.line('  cut: the trajectory was cut at its first contact violation; the fraction is over the frames kept, and the condition cannot converge that round');
  }
  const unvalidated = r.rounds.filter((rr) => rr.unvalidated);
  if (unvalidated.length) {
    out.line('');
    out.line(`not validated: ${unvalidated.map((rr) => `r${rr.round}`).join(', ')} (validation failed; explored with short runs under rounds.explore_unvalidated; such a round cannot converge)`);
  }
  const calibrated = r.rounds.filter((rr) => rr.calibration && rr.calibration.frames > 0);
  if (calibrated.length) {
    out.line('');
    out.line('spread calibration (true force error / committee spread on the frames labeled; 1 is honest, above 1 overconfident):');
    for (const rr of calibrated) {
      const c = rr.calibration!;
      out.line(
        `  r${rr.round}  models of r${c.models_round}: median ${c.median!.toFixed(2)}, 90th percentile ${c.p90!.toFixed(2)} over ${c.frames} frame(s); ` +
          `error above spread on ${c.above_one}`,
      );
    }
  }
  formatRevisionsBlock(r, out);
  formatCoreHours(r, out);
  out.line('');
  if (r.ended) {
    out.line(`campaign ${out.word(r.ended.state)} in round ${r.ended.round}${r.ended.holding.length ? `; held back by ${r.ended.holding.join(', ')}` : ''}`);
    for (const reason of r.ended.state === 'exhausted' ? r.ended.reasons : []) out.line(`  - ${reason}`);
    return;
  }
  const pending = r.revisions?.find((v) => v.pending);
  if (pending) {
    out.line(`campaign revision ${pending.number} changes ${pending.affects_data.join(', ')}, which labels already made depend on:`);
    out.line(`next: ratchet run ${shellQuote(r.campaign.file)} --accept-revision (keep them), or --relabel (label them again in the next label stage)`);
    return;
  }
  if (r.at) {
    const rr = r.rounds[r.at.round];
    const s = rr?.stages.find((k) => k.stage === r.at!.stage);
    if (r.held?.length) {
      out.line(`held (never started again until a person releases them):`);
      for (const h of r.held.slice(0, 20)) {
        const how = h.how === 'cancelled' ? 'cancelled by a person' : `stopped by ${h.by ?? 'a person'}`;
        out.line(`  ${pad(h.task, 20)} ${how}: ${oneLine(h.reason, 200)}`);
        out.line(`  ${' '.repeat(20)} run it again with: ${h.release}`);
      }
      if (r.held.length > 20) out.line(`  ... and ${r.held.length - 20} more (ratchet status --json lists them)`);
    }
    if (r.blocking) {
      const why = { tasks: 'failed tasks', gate: 'its gate failed', held: 'held tasks' }[r.blocking.why];
      out.line(`${out.word('blocked')}: ${r.blocking.stage} (${why})`);
      for (const reason of r.blocking.reasons) {
        const lines = reason.split('\n');
        out.line(`  - ${oneLine(lines[0], 300)}`);
        for (const more of lines.slice(1, 4)) out.line(`      ${oneLine(more, 300)}`);
        if (lines.length > 4) out.line(`      (${lines.length - 4} more line(s))`);
      }
      for (const n of r.blocking.next) out.line(n);
    } else if (s && (s.phase === 'running' || s.phase === 'ready')) {
      const done = Object.entries(s.counts).filter(([k]) => k !== 'planned' && k !== 'submitted').reduce((n, [, v]) => n + (v ?? 0), 0);
      const live = `${s.running} running${s.waiting ? `, ${s.waiting} waiting` : ''}`;
      out.line(`now: ${stageId(r.at.round, r.at.stage)} ${done}/${s.tasks} ended, ${live}`);
      if (!r.running || r.running.alive === false) out.line(`next: ratchet run ${r.campaign.file}`);
    } else {
      out.line(`next: ${stageId(r.at.round, r.at.stage)}; run: ratchet run ${r.campaign.file}`);
    }
  }
}

function cellText(out: Output, s: StageStatus): string {
  if (s.phase === 'pending') return pad('·', CELL);
  const ok = s.counts.succeeded ?? 0;
  let w: string;
  switch (s.phase) {
    case 'passed':
    case 'blocked':
      w = s.verdict ?? '?';
      break;
    case 'failed':
      w = 'failed';
      break;
    case 'held':
      w = 'held';
      break;
    case 'collect':
      w = 'judging';
      break;
    default:
      w = s.running > 0 ? 'running' : s.waiting > 0 ? 'waiting' : 'ready';
  }
  const plain = `${w} ${ok}/${s.tasks}`;
  return `${out.word(w)} ${ok}/${s.tasks}${' '.repeat(Math.max(1, CELL - plain.length))}`;
}

function oneLine(s: string, max = 160): string {
  const l = s.split('\n')[0];
  return l.length > max ? `${l.slice(0, max)}…` : l;
}


/** The campaign revisions, and which rounds ran under which. */
function formatRevisionsBlock(r: StatusReport, out: Output): void {
  const revs = r.revisions ?? [];
  if (revs.length === 0) return;
  out.line('');
  out.line(`campaign revisions (ratchet revisions ${shellQuote(r.campaign.file)} A B shows what changed):`);
  for (const v of revs) {
    const ran = r.rounds.filter((rr) => (rr.revisions ?? (rr.revision !== undefined ? [rr.revision] : [])).includes(v.number)).map((rr) => `r${rr.round}`);
    const what = v.pending
      ? `; ${v.affects_data.length} affect(s) data already made: waits for --accept-revision or --relabel`
      : v.decision
        ? `; ${v.decision.choice === 'relabel' ? `relabel in r${v.decision.round}` : 'accepted'} by ${v.decision.by}`
        : '';
    out.line(`  ${pad(String(v.number), 4)}${pad(v.sha256.slice(0, 12), 14)}from r${v.round}, ${v.changes} change(s)${what}${ran.length ? `; rounds ${ran.join(', ')}` : ''}`);
  }
}

const round6 = (h: number): number => Math.round(h * 1e6) / 1e6;

function coreHours(view: CampaignView, state: CampaignState): StatusReport['core_hours'] {
  const u = usage(view, state);
  const b = view.campaign.budget;
  return {
    total: round6(u.total),
    by_round: Object.fromEntries([...u.byRound].sort((x, y) => x[0] - y[0]).map(([k, v]) => [`r${k}`, round6(v)])),
    by_stage: Object.fromEntries([...u.byStage].map(([k, v]) => [k, round6(v)])),
    unknown_attempts: u.unknown,
    budget: { ...(b.core_hours !== undefined ? { core_hours: b.core_hours } : {}), ...(b.core_hours_per_round !== undefined ? { core_hours_per_round: b.core_hours_per_round } : {}) },
  };
}

/** Core-hours used per round and stage, with the budget when one is set. */
function formatCoreHours(r: StatusReport, out: Output): void {
  const c = r.core_hours;
  const rounds = Object.keys(c.by_round);
  if (rounds.length === 0 && c.budget.core_hours === undefined && c.budget.core_hours_per_round === undefined) return;
  const f = (h: number): string => (h === 0 ? '0' : h < 1 ? h.toPrecision(2) : h.toFixed(1));
  out.line('');
  const caps = [
    c.budget.core_hours !== undefined ? `campaign budget ${c.budget.core_hours}` : '',
    c.budget.core_hours_per_round !== undefined ? `per round ${c.budget.core_hours_per_round}` : '',
  ].filter(Boolean);
  out.line(`core-hours used: ${f(c.total)}${caps.length ? ` (${caps.join(', ')})` : ''}${c.unknown_attempts ? `; ${c.unknown_attempts} attempt(s) without an exit record not counted` : ''}`);
  for (const rk of rounds) {
    const parts = STAGES.map((s) => [s, c.by_stage[`${rk}/${s}`]] as const)
      .filter(([, h]) => h !== undefined)
      .map(([s, h]) => `${s} ${f(h!)}`);
    out.line(`  ${pad(rk, 5)} ${pad(f(c.by_round[rk]), 8)} ${parts.join(', ')}`);
  }
}
