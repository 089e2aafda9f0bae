/**
 * One engine session: the campaign view, the journal (the only writer of the ledger), the folded
 * state kept up to date with every event written, the backend, and how to talk to the user.
 * Every ledger write goes through `append`/`appendMany` here, so the state never lags the ledger.
 */
import { createHash } from 'node:crypto';
import { copyFileSync, mkdirSync, renameSync } from 'node:fs';
import { basename, isAbsolute, join, relative, resolve, sep } from 'node:path';
import type { Backend } from '../backends/backend.js';
import { artifactEvent, artifactId, campaignRelative, hashArtifact } from '../ledger/artifacts.js';
import type { NewEvent, LedgerEvent } from '../ledger/journal.js';
import { VERSION } from '../version.js';
import type { EngineEvent } from './events.js';
import type { Stage } from './ids.js';
import type { Output } from './output.js';
import { type SamplePolicy } from './sample-policy.js';
import { applyEvent, type CampaignState } from './state.js';
import type { NewArtifact, StageContext } from './stages/types.js';
import { killPoint } from './testhook.js';
import type { CampaignView } from './view.js';

/** Where the ledger's events go: a Journal, or nowhere (dry run: the state still folds them). */
export interface EventSink {
  append(e: NewEvent): Promise<LedgerEvent>;
  appendMany(e: NewEvent[]): Promise<LedgerEvent[]>;
}

/** A dry run's sink: numbers events after the ledger's last one and keeps them in memory only. */
export class MemorySink implements EventSink {
  readonly events: LedgerEvent[] = [];
  constructor(private seq: number) {}
  async append(e: NewEvent): Promise<LedgerEvent> {
    return (await this.appendMany([e]))[0];
  }
  async appendMany(es: NewEvent[]): Promise<LedgerEvent[]> {
    const out = es.map((e) => ({ ...e, seq: ++this.seq, at: new Date().toISOString() }) as LedgerEvent);
    this.events.push(...out);
    return out;
  }
}

export class Engine {
  /** Set when SIGINT/SIGTERM arrived: finish the current step, then stop. */
  interrupted: NodeJS.Signals | null = null;
  private interruptWaiters: (() => void)[] = [];
  /** Tasks restarted by the engine itself (cancelled, lost ...) in this process: at most once each. */
  readonly restartedHere = new Set<string>();
  /** --allow-over-budget: submit over the budget (recorded as budget_overridden). */
  allowOverBudget = false;

  constructor(
    readonly view: CampaignView,
    readonly sink: EventSink,
    readonly state: CampaignState,
    readonly backend: Backend,
    readonly out: Output,
    readonly samplePolicy: SamplePolicy,
    readonly dryRun = false,
  ) {}

  async append(e: EngineEvent | NewEvent): Promise<LedgerEvent> {
    const r = await this.sink.append(e as NewEvent);
    applyEvent(this.state, r);
    killPoint('append');
    this.tell(r);
    return r;
  }

  async appendMany(es: (EngineEvent | NewEvent)[]): Promise<LedgerEvent[]> {
    if (es.length === 0) return [];
    const rs = await this.sink.appendMany(es as NewEvent[]);
    for (const r of rs) {
      applyEvent(this.state, r);
      killPoint('append');
      this.tell(r);
    }
    return rs;
  }

  /** With --verbose: one line per task event. */
  private tell(e: LedgerEvent): void {
    if (!this.out.verbose) return;
    if (e.type === 'task_submitted') this.out.detail(`  ${e.task} attempt ${e.attempt}: submitted (${e.backend} ${e.job_id})`);
    else if (e.type === 'task_started') this.out.detail(`  ${e.task} attempt ${e.attempt}: started`);
    else if (e.type === 'task_ended')
      this.out.detail(`  ${e.task} attempt ${e.attempt}: ${e.state}${e.exit_code !== undefined ? ` (exit ${e.exit_code})` : ''}${e.reason ? `: ${String(e.reason).split('\n')[0]}` : ''}`);
  }

  interrupt(signal: NodeJS.Signals): void {
    this.interrupted = signal;
    for (const w of this.interruptWaiters.splice(0)) w();
  }

  /** Resolves when an interrupt arrives (at once if one already has). */
  whenInterrupted(): Promise<void> {
    if (this.interrupted) return Promise.resolve();
    return new Promise((r) => this.interruptWaiters.push(r));
  }

  /** Path relative to the campaign directory, as the ledger records it. */
  rel(absPath: string): string {
    return campaignRelative(this.view.dir, absPath);
  }

  artifactId(absPath: string): string | undefined {
    const r = relative(this.view.dir, absPath);
    if (r.startsWith('..') || isAbsolute(r)) return undefined;
    return this.state.byPath.get(r.split(sep).join('/'))?.id;
  }

  /**
   * Register artifacts (one ledger write for all), skipping those already registered with the same
   * content at the same path. Each file must exist (or its content be given). Returns the ids in order.
   */
  async registerMany(list: NewArtifact[]): Promise<string[]> {
    const ids: string[] = [];
    const events: NewEvent[] = [];
    for (const a of list) {
      const hash =
        a.content !== undefined
          ? { sha256: createHash('sha256').update(a.content).digest('hex'), bytes: Buffer.byteLength(a.content), kind: 'file' as const }
          : await hashArtifact(a.path);
      const id = artifactId(hash.sha256);
      ids.push(id);
      if (this.dryRun) continue;
      const rel = this.rel(a.path);
      if (this.state.byPath.get(rel)?.id === id) continue;
      const ev = await artifactEvent({
        campaignDir: this.view.dir,
        path: a.path,
        role: a.role,
        task: a.task,
        inputs: a.inputs,
        command: a.command,
        campaign_sha256: this.view.sha256,
        tool_version: VERSION,
        hash,
      });
      events.push(ev);
    }
    if (events.length > 0) {
      killPoint('hashed');
      // Batches keep one line per event and one sync per batch.
      for (let k = 0; k < events.length; k += 1000) await this.appendMany(events.slice(k, k + 1000));
    }
    return ids;
  }

  async register(a: NewArtifact): Promise<string> {
    return (await this.registerMany([a]))[0];
  }

  stageContext(round: number): StageContext {
    return {
      view: this.view,
      state: this.state,
      round,
      register: (a) => this.register(a),
      artifactId: (p) => this.artifactId(p),
      samplePolicy: this.samplePolicy,
      log: (m) => this.out.line(m),
    };
  }

  stageCommand(stage: Stage): string | undefined {
    return this.view.stages[stage].command;
  }
}

/**
 * Starting structures outside the campaign directory are copied into <campaign>/inputs/ (named by a
 * hash of the source path and its file name; copied again at every run, so an edited source is seen)
 * and the view points at the copies: every artifact lies inside the campaign directory.
 * `dryRun` maps the paths without copying.
 */
export function bringInputsInside(view: CampaignView, dryRun: boolean): CampaignView {
  const map = new Map<string, string>();
  const inside = (p: string): string => {
    const r = relative(view.dir, p);
    if (!r.startsWith('..') && !isAbsolute(r)) return p;
    const hit = map.get(p);
    if (hit) return hit;
    const tag = createHash('sha256').update(resolve(p)).digest('hex').slice(0, 12);
    const target = join(view.dir, 'inputs', `${tag}-${basename(p)}`);
    if (!dryRun) {
      mkdirSync(join(view.dir, 'inputs'), { recursive: true });
      const tmp = `${target}.tmp-${process.pid}`;
      copyFileSync(p, tmp);
      renameSync(tmp, target);
    }
    map.set(p, target);
    return target;
  };
  return {
    ...view,
    start: view.start.map(inside),
    conditions: view.conditions.map((c) => ({ ...c, start: inside(c.start) })),
  };
}
