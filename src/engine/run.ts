/**
 * `ratchet run` and `ratchet retry` as library calls: load the campaign (bad input: exit code 2,
 * nothing written), open the journal (the lock), reconcile, optionally mark tasks for retry, advance
 * as far as possible, print what happened and what to do next. Returns the exit code:
 * 0 finished, advanced, stopped by --stop-before/--stop-after or waiting on a cluster; 1 blocked (a gate or failed tasks)
 * or the campaign is locked by another run; 2 bad input; 130 interrupted by SIGINT or SIGTERM.
 */
import { hostname } from 'node:os';
import { getBackend } from '../backends/registry.js';
import type { Backend } from '../backends/backend.js';
import { shellQuote } from '../backends/shell.js';
import { CampaignError, loadCampaign } from '../campaign/load.js';
import { Journal, LedgerError } from '../ledger/journal.js';
import { LockError } from '../ledger/lock.js';
import { VERSION } from '../version.js';
import { advance, type Outcome } from './advance.js';
import { Engine, bringInputsInside } from './context.js';
import { dryRun } from './dryrun.js';
import { parseUntil, stageId, type Until } from './ids.js';
import { Output } from './output.js';
import { reconcile } from './reconcile.js';
import { preflightNextStep } from './preflight-step.js';
import { applyRetry, planRetry, type RetryPlan } from './retry.js';
import { samplePolicy as defaultPolicy, type SamplePolicy } from './sample-policy.js';
import { foldEvents } from './state.js';
import { applyStopRequests } from './stop.js';
import { identityEvent, identityProblem, readIdentity } from './identity.js';
import { revisionFlagsProblem, revisionStep } from './revisions.js';
import { campaignView, type CampaignView } from './view.js';

export interface RunOptions {
  /** Path of the campaign file, as the user gave it (used in the "what next" hints). */
  campaign: string;
  /** Backend name (default: the campaign's backend.kind). */
  backend?: string;
  /** Tasks at once (default: the campaign's backend.jobs, else the number of cores); text as typed is checked here. */
  jobs?: number | string;
  /** Stop before this point: "2", "r1/train" or "train" (`--stop-before`). */
  stopBefore?: string;
  /** Stop after this point, which runs and is judged: "2", "r1/train" or "train" (`--stop-after`). */
  stopAfter?: string;
  /** @deprecated the library's old name of stopBefore (the command line's --until is refused). */
  until?: string;
  dryRun?: boolean;
  /** Keep polling a cluster backend until the stage's tasks end (local always waits). */
  follow?: boolean;
  /** `ratchet retry`: the task or stage to run again. */
  retry?: string;
  out?: Output;
  /** -q: no progress lines; -v: a line per task event. */
  quiet?: boolean;
  verbose?: boolean;
  /** Error lines (default: stderr, prefixed "ratchet: "). */
  error?: (message: string) => void;
  /** Install SIGINT/SIGTERM handlers (the CLI does; tests calling the library need not). */
  handleSignals?: boolean;
  /** Check the next step's scripts with the backend's preflight; submit nothing (exit 1 with problems). */
  preflight?: boolean;
  /** Submit even when the core-hour budget would be exceeded (recorded as budget_overridden). */
  allowOverBudget?: boolean;
  /** Keep the labels made before a campaign revision that affects them, and go on (recorded as revision_decided). */
  acceptRevision?: boolean;
  /** Label the frames of a revision's affected rounds again in the next label stage (recorded as revision_decided). */
  relabel?: boolean;
  /** Replace the sample policy (tests). */
  samplePolicy?: SamplePolicy;
}

export interface RunResult {
  exitCode: number;
  outcome?: Outcome;
}

function exitCodeOf(err: unknown): number | undefined {
  const c = (err as { exitCode?: unknown } | null)?.exitCode;
  return typeof c === 'number' ? c : undefined;
}

/** Load and check everything the run needs before anything is written. */
export async function prepare(
  opts: RunOptions,
  error: (m: string) => void,
): Promise<{ view: CampaignView; backend: Backend; until?: Until } | number> {
  let until: Until | undefined;
  const before = opts.stopBefore ?? opts.until;
  const flags = revisionFlagsProblem(opts);
  if (flags) {
    error(flags);
    return 2;
  }
  if (before !== undefined && opts.stopAfter !== undefined) {
    error('--stop-before and --stop-after: choose one');
    return 2;
  }
  const point = before ?? opts.stopAfter;
  if (point !== undefined) {
    const flag = before !== undefined ? '--stop-before' : '--stop-after';
    const parsed = parseUntil(point);
    if (!parsed) {
      error(`${flag}: expected a round (2), a stage of a round (r1/train) or a stage (train), found ${JSON.stringify(point)}`);
      return 2;
    }
    until = before !== undefined ? parsed : { ...parsed, after: true };
  }
  let view: CampaignView;
  try {
    view = campaignView(await loadCampaign(opts.campaign));
  } catch (err) {
    if (err instanceof CampaignError) {
      error(err.message);
      return 2;
    }
    throw err;
  }
  let jobs: number | undefined;
  if (opts.jobs !== undefined) {
    jobs = typeof opts.jobs === 'number' ? opts.jobs : /^\s*\d+\s*$/.test(opts.jobs) ? Number(opts.jobs) : NaN;
    if (!(Number.isInteger(jobs) && jobs >= 1)) {
      error(`--jobs: expected a whole number of at least 1, found ${JSON.stringify(String(opts.jobs))}`);
      return 2;
    }
  }
  let backend: Backend;
  try {
    // Every key of the campaign's backend section goes to the backend (cluster backends read theirs);
    // --jobs and the resolved template folder win.
    const { kind: _kind, template_dir: _t, ...settings } = view.campaign.backend;
    backend = getBackend(opts.backend ?? view.backend.kind, { ...settings, jobs: jobs ?? view.backend.jobs, templatesDir: view.backend.templateDir });
  } catch (err) {
    const code = exitCodeOf(err);
    if (code !== undefined) {
      error((err as Error).message);
      return code;
    }
    throw err;
  }
  return { view, backend, until };
}

export async function runCampaign(opts: RunOptions): Promise<RunResult> {
  const out = opts.out ?? new Output(process.stdout);
  if (opts.quiet) out.quiet = true;
  if (opts.verbose) out.verbose = true;
  const error = opts.error ?? ((m: string) => process.stderr.write(`ratchet: ${m}\n`));
  const prep = await prepare(opts, error);
  if (typeof prep === 'number') return { exitCode: prep };
  const { backend, until } = prep;
  const policy = opts.samplePolicy ?? defaultPolicy;
  if (opts.dryRun) {
    if (opts.retry !== undefined) {
      error('--dry-run cannot be combined with retry: a retry writes to the ledger');
      return { exitCode: 2 };
    }
    if (opts.preflight) {
      error('--dry-run and --preflight: choose one (--preflight checks the next step with the scheduler, --dry-run only renders it)');
      return { exitCode: 2 };
    }
    // One state per campaign file: a dry run of another campaign file reads no state of this folder.
    const other = await otherCampaignProblem(prep.view);
    if (other) {
      error(other);
      return { exitCode: 2 };
    }
    return dryRun({ view: prep.view, backend, out, error, until, samplePolicy: policy, campaignArg: opts.campaign });
  }

  let journal: Journal;
  try {
    journal = await Journal.open(prep.view.dir);
  } catch (err) {
    if (err instanceof LockError) {
      error(err.message);
      return { exitCode: 1 };
    }
    if (err instanceof LedgerError) {
      error(err.message);
      return { exitCode: 2 };
    }
    throw err;
  }
  const folded = foldEvents(journal.history);
  // One state per campaign file: refuse another campaign file's folder before anything is written.
  const other = identityProblem(prep.view, folded.identity);
  if (other) {
    await journal.close();
    error(other);
    return { exitCode: 2 };
  }
  const view = bringInputsInside(prep.view, false);
  const engine = new Engine(view, journal, folded, backend, out, policy);
  engine.allowOverBudget = opts.allowOverBudget === true;
  const cluster = backend.drain === undefined;

  const handlers: [NodeJS.Signals, () => void][] = [];
  if (opts.handleSignals) {
    for (const sig of ['SIGINT', 'SIGTERM'] as NodeJS.Signals[]) {
      const h = (): void => {
        if (engine.interrupted) {
          // A second signal: leave now (every ledger line already written is whole).
          process.stderr.write('ratchet: stopping at once\n');
          process.exit(130);
        }
        out.line(
          cluster
            ? `${sig} received: stopping polling; queued and running jobs stay with the scheduler (again to quit at once)`
            : `${sig} received: stopping tasks and recording where they stand (again to quit at once)`,
        );
        engine.interrupt(sig);
      };
      process.on(sig, h);
      handlers.push([sig, h]);
    }
  }

  let outcome: Outcome | undefined;
  let exitCode = 1;
  try {
    // A stop that no run has recorded yet (ratchet stop while the lock was held) comes first: its tasks
    // are held before reconcile could see them cancelled.
    await applyStopRequests(engine);
    // Reconcile first: it only records what already happened (tasks that ended while no run watched).
    const rec = await reconcile(engine);
    let retryPlan: RetryPlan | undefined;
    if (opts.retry !== undefined && opts.preflight) {
      error('--preflight cannot be combined with retry: run ratchet run --preflight to check the next step');
      return { exitCode: 2 };
    }
    if (opts.retry !== undefined) {
      try {
        retryPlan = await planRetry(engine, opts.retry);
      } catch (err) {
        const code = exitCodeOf(err);
        if (code === undefined) throw err;
        // A retry that cannot be done is bad input: nothing of this run is recorded.
        error((err as Error).message);
        return { exitCode: code };
      }
    }
    // A new ledger (or one written before campaigns were recorded: adopted) is bound to this campaign file.
    if (!engine.state.identity) await engine.append(identityEvent(view, engine.state.events > 0));
    // A preflight is recorded as one 'preflight' event, never as a run (status must not read it as a stopped run).
    if (opts.preflight) {
      out.line(`campaign ${view.name} (${opts.campaign}), backend ${backend.name}: preflight, nothing is submitted`);
      exitCode = await preflightNextStep(engine);
      return { exitCode };
    }
    // A new version of the campaign file is recorded (campaign_revision); one that changes what data already
    // made depends on stops the run until a person chooses (src/engine/revisions.ts).
    const stop = await revisionStep(engine, { campaignArg: opts.campaign, acceptRevision: opts.acceptRevision, relabel: opts.relabel }, error);
    if (stop !== undefined) return { exitCode: stop };
    await engine.append({
      type: 'run_started',
      command: opts.retry !== undefined ? 'retry' : 'run',
      backend: backend.name,
      jobs: (backend as { jobs?: number }).jobs ?? 0,
      ...((opts.stopBefore ?? opts.until) !== undefined ? { stop_before: opts.stopBefore ?? opts.until } : {}),
      ...(opts.stopAfter !== undefined ? { stop_after: opts.stopAfter } : {}),
      ...(opts.allowOverBudget ? { allow_over_budget: true } : {}),
      host: hostname(),
      pid: process.pid,
      campaign_sha256: view.sha256,
      tool_version: VERSION,
    });
    out.line(`campaign ${view.name} (${opts.campaign}), backend ${backend.name}${(backend as { jobs?: number }).jobs ? `, ${(backend as { jobs?: number }).jobs} at once` : ''}`);
    const found = Object.entries(rec.ended).map(([s, n]) => `${n} ${s}`);
    if (found.length) out.line(`reconciled: ${found.join(', ')} since the last run`);
    if (rec.live) out.line(`${rec.live} task(s) of an earlier run still running; waiting for them`);
    if (retryPlan) {
      const marks = await applyRetry(engine, retryPlan);
      if (marks.released.length) out.line(`released ${marks.released.length} held task(s): ${marks.released.join(', ')}`);
      if (marks.regate) out.line(`${marks.regate}: no failed task; its gate will judge it again`);
      else if (marks.tasks.length) out.line(`retrying ${marks.tasks.length} task(s): ${marks.tasks.join(', ')}`);
    }
    outcome = await advance(engine, { until, follow: opts.follow });
    exitCode = outcomeExitCode(outcome);
    await engine.append({
      type: 'run_ended',
      outcome: runOutcome(outcome),
      exit_code: exitCode,
      ...(outcome.kind === 'interrupted' ? { signal: outcome.signal } : {}),
    });
    for (const l of describeOutcome(outcome, opts.campaign)) out.line(l);
  } catch (err) {
    const code = exitCodeOf(err) ?? 1;
    error((err as Error).message);
    exitCode = code;
    await engine.append({ type: 'run_ended', outcome: 'error', exit_code: code, error: (err as Error).message }).catch(() => undefined);
  } finally {
    for (const [sig, h] of handlers) process.removeListener(sig, h);
    await journal.close();
  }
  return { exitCode, outcome };
}

/** The refusal when the folder's state belongs to another campaign file (a ledger that cannot be read is left to the caller). */
async function otherCampaignProblem(view: CampaignView): Promise<string | undefined> {
  try {
    return identityProblem(view, await readIdentity(view.dir));
  } catch (err) {
    if (err instanceof LedgerError) return undefined;
    throw err;
  }
}

export function outcomeExitCode(o: Outcome): number {
  switch (o.kind) {
    case 'finished':
    case 'stopped':
    case 'waiting':
      return 0;
    case 'blocked':
      return 1;
    case 'interrupted':
      return 130;
  }
}

function runOutcome(o: Outcome): 'finished' | 'advanced' | 'blocked' | 'waiting' | 'stopped' | 'interrupted' {
  switch (o.kind) {
    case 'finished':
      return 'finished';
    case 'stopped':
      return 'stopped';
    case 'waiting':
      return 'waiting';
    case 'blocked':
      return 'blocked';
    case 'interrupted':
      return 'interrupted';
  }
}

/** What happened and what to do next, in plain words. */
export function describeOutcome(o: Outcome, campaignArg: string): string[] {
  const c = shellQuote(campaignArg);
  switch (o.kind) {
    case 'finished':
      return o.state === 'converged'
        ? [`campaign converged in round ${o.round}: every condition reached the confident-fraction target and validation passed`]
        : [
            `campaign exhausted after round ${o.round} without converging`,
            ...o.reasons.map((r) => `  - ${r}`),
            ...(o.holding.length ? [`held back by: ${o.holding.join(', ')}`] : []),
            `next: raise rounds.max in the campaign (or change what held it back) and run: ratchet run ${c}`,
          ];
    case 'stopped':
      return [`stopped before ${stageId(o.at.round, o.at.stage)} (${o.until}); run again without ${o.until.split(' ')[0]} to go on`];
    case 'waiting':
      return [`${o.outstanding} task(s) of ${stageId(o.round, o.stage)} still queued or running; run again (ratchet run ${c}) to follow them`];
    case 'interrupted':
      return [
        `interrupted by ${o.signal}${o.cancelled.length ? `: ${o.cancelled.length} task(s) stopped and recorded` : ''}; the ledger is consistent`,
        `next: ratchet run ${c} goes on from here`,
      ];
    case 'blocked': {
      const sid = stageId(o.round, o.stage);
      if (o.why === 'held') {
        return [
          o.tasks.length ? `${sid} is held: ${o.tasks.length} task(s) stopped or cancelled by a person; no run starts them again` : `${sid}: the campaign was stopped`,
          ...o.reasons.map((r) => `  - ${r}`),
          o.tasks.length
            ? `next: when it should go on, release ${o.tasks.length === 1 ? 'it' : 'them'} with: ratchet retry ${c} ${o.tasks.length === 1 ? o.tasks[0] : sid}`
            : `next: ratchet run ${c} goes on from here`,
        ];
      }
      const lines = [o.why === 'tasks' ? `${sid} is blocked: ${o.tasks.length} task(s) failed` : `${sid} is blocked by its gate:`];
      for (const r of o.reasons) lines.push(`  - ${r.replace(/\n/g, '\n    ')}`);
      if (o.why === 'tasks') {
        const one = o.tasks[0];
        lines.push(
          `next: look at rounds/${one}/stderr.log, fix the cause (the command, its inputs or the campaign), then run: ratchet retry ${c} ${o.tasks.length === 1 ? one : sid}`,
        );
      } else {
        lines.push(
          `next: fix what the gate found (the stage's command, or its limits in the campaign), then run: ratchet retry ${c} ${sid}`,
          `      (runs failed tasks again, or judges the stage again; name one task, e.g. ${sid}/0000, to run it again)`,
        );
      }
      return lines;
    }
  }
}
