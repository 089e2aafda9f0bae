/**
 * Campaign revisions: which version of the campaign file each part of the campaign ran under.
 *
 * Each `run` and `retry` compares the campaign file's sha256 with the revision in force. A new version is
 * kept as `.ratchet/revisions/<sha256>.yaml` (the file's bytes, written atomically before the event) and
 * recorded as a 'campaign_revision' event with its number, the revision before it, the key paths that
 * differ (a deep diff of the two parsed campaigns, defaults filled in: src/campaign/diff.ts) and those of
 * them that affect data already made (src/campaign/diff.ts, affectsData). Going back to an earlier file
 * is a revision too (a new number, the same sha256).
 *
 * When such a change arrives after some round has labels, the run stops (exit 1) until a person chooses:
 * `--accept-revision` keeps the labels and goes on; `--relabel` makes the next label stage to be planned
 * label, besides its own frames, every frame of the earlier rounds' labeled.xyz, and build its data sets
 * from its own labels only (src/engine/stages/label.ts). The choice is recorded ('revision_decided') and
 * never asked again for that revision. Changes that act on the future only go on with a one-line note.
 */
import { mkdir, readFile } from 'node:fs/promises';
import { createHash } from 'node:crypto';
import { join } from 'node:path';
import { shellQuote } from '../backends/shell.js';
import { affectsData, diffCampaigns, type CampaignChange } from '../campaign/diff.js';
import { CampaignError, loadCampaign, parseCampaignText } from '../campaign/load.js';
import type { Campaign } from '../campaign/schema.js';
import { foldLedger, LedgerError } from '../ledger/journal.js';
import { RATCHET_DIR } from '../ledger/lock.js';
import type { Engine } from './context.js';
import type { CampaignRevisionEvent, RevisionDecidedEvent } from './events.js';
import { writeFileAtomic } from './fsutil.js';
import { identityProblem } from './identity.js';
import type { Output } from './output.js';
import { applyEvent, emptyState, frontier, type CampaignState, type RevisionRecord } from './state.js';
import { personName } from './stop.js';
import { campaignView, type CampaignView } from './view.js';

/** Where a revision's copy of the campaign file is kept (absolute). */
export function revisionFile(dir: string, sha256: string): string {
  return join(dir, RATCHET_DIR, 'revisions', `${sha256}.yaml`);
}

export const short = (sha: string): string => sha.slice(0, 12);

/** The revision in force (the last recorded), if any. */
export function inForce(state: CampaignState): RevisionRecord | undefined {
  return state.revisions[state.revisions.length - 1];
}

/** The last revision whose settings the data already made stands on: decided, or needing no decision. */
export function settledRevision(state: CampaignState): RevisionRecord | undefined {
  for (let k = state.revisions.length - 1; k >= 0; k--) {
    const r = state.revisions[k];
    if (!r.decision_needed || r.decided) return r;
  }
  return undefined;
}

/**
 * Rounds whose labels are in the current data sets: those whose label stage was judged, from the last
 * round that relabeled earlier rounds (its labeled.xyz holds their frames already) on.
 */
export function labeledRounds(state: CampaignState): number[] {
  const from = Math.max(0, ...[...state.relabel.keys()].filter((k) => state.rounds[k]?.stages.label?.gate));
  return state.rounds.filter((rr) => rr.round >= from && rr.stages.label?.gate).map((rr) => rr.round);
}

/**
 * The rounds a relabel choice labels again: those whose label stage is planned, from the last round that
 * relabeled earlier rounds on (a label stage planned under the earlier settings but not yet judged included).
 */
export function relabelSources(state: CampaignState): number[] {
  const from = Math.max(0, ...[...state.relabel.keys()].filter((k) => state.rounds[k]?.stages.label?.gate));
  return state.rounds.filter((rr) => rr.round >= from && rr.stages.label).map((rr) => rr.round);
}

/** The round whose label stage relabels: the first round whose label stage is not yet planned. */
export function relabelRound(state: CampaignState): number {
  let r = 0;
  for (const rr of state.rounds) if (rr.stages.label) r = rr.round + 1;
  return r;
}

/** The revision waiting for a person's decision, if any. */
export function pendingRevision(state: CampaignState): RevisionRecord | undefined {
  const r = inForce(state);
  return r && r.decision_needed && !r.decided ? r : undefined;
}

/** The parsed campaign of a recorded revision, or why it cannot be read. */
export async function revisionCampaign(dir: string, sha256: string): Promise<Campaign | string> {
  const p = revisionFile(dir, sha256);
  let text: string;
  try {
    text = await readFile(p, 'utf8');
  } catch (err) {
    return `cannot read ${p}: ${(err as NodeJS.ErrnoException).code ?? (err as Error).message}`;
  }
  try {
    return parseCampaignText(text, p).campaign;
  } catch (err) {
    return err instanceof CampaignError ? err.message : `cannot parse ${p}: ${(err as Error).message}`;
  }
}

/** Read the campaign file's bytes, checking they are the ones loaded. */
async function currentText(view: CampaignView): Promise<Buffer> {
  const bytes = await readFile(view.file);
  const sha = createHash('sha256').update(bytes).digest('hex');
  if (sha !== view.sha256) throw Object.assign(new Error(`${view.file} changed while ratchet read it; run again`), { exitCode: 1 });
  return bytes;
}

/**
 * Record the campaign file as a new revision when it is not the one in force. Returns the new record, or
 * undefined when the file is the revision in force.
 */
export async function recordRevision(engine: Engine): Promise<RevisionRecord | undefined> {
  const { view, state } = engine;
  const now = inForce(state);
  if (now && now.sha256 === view.sha256) return undefined;
  const bytes = await currentText(view);
  const copy = revisionFile(view.dir, view.sha256);
  await mkdir(join(view.dir, RATCHET_DIR, 'revisions'), { recursive: true });
  await writeFileAtomic(copy, bytes);
  const ev: CampaignRevisionEvent = {
    type: 'campaign_revision',
    sha256: view.sha256,
    number: state.revisions.length + 1,
    changes: [],
    affects_data: [],
    round: state.ended ? state.ended.round : frontier(state).round,
  };
  if (now) {
    ev.previous = now.sha256;
    const before = await revisionCampaign(view.dir, now.sha256);
    if (typeof before === 'string') ev.unknown = before;
    else ev.changes = diffCampaigns(before, view.campaign) as CampaignChange[];
    // What data already made depends on is measured against the last settled revision (the previous one,
    // unless that one still waits for a decision).
    const base = settledRevision(state);
    let dataChanges = ev.changes;
    if (base && base.sha256 !== now.sha256) {
      ev.compared_with = base.sha256;
      const b = await revisionCampaign(view.dir, base.sha256);
      dataChanges = typeof b === 'string' ? ev.changes : diffCampaigns(b, view.campaign);
    }
    ev.affects_data = dataChanges.map((c) => c.path).filter(affectsData);
    if (ev.affects_data.length > 0 && labeledRounds(state).length > 0) ev.decision_needed = true;
  }
  await engine.append(ev);
  return inForce(state);
}

function show(v: unknown): string {
  if (v === undefined) return '(absent)';
  const t = JSON.stringify(v);
  return t.length > 120 ? `${t.slice(0, 117)}...` : t;
}

/** "path: old -> new" for one change. */
export function describeChange(c: { path: string; old?: unknown; new?: unknown }): string {
  return `${c.path}: ${show(c.old)} -> ${show(c.new)}`;
}

/** The message that stops a run until a person decides on a revision that affects data already made. */
export function decisionMessage(state: CampaignState, r: RevisionRecord, campaignArg: string): string[] {
  const c = shellQuote(campaignArg);
  const rounds = labeledRounds(state);
  const next = relabelRound(state);
  const changed = r.changes.filter((k) => r.affects_data.includes(k.path));
  const lines = [
    `campaign revision ${r.number} (${short(r.sha256)}) changes settings that data already made depends on:`,
    ...(changed.length ? changed.map((k) => `  ${describeChange(k)}`) : r.affects_data.map((p) => `  ${p}`)),
    `labels made under the earlier settings: ${rounds.map((k) => `r${k}`).join(', ')}`,
    ...rounds.map((k) => `  rounds/r${k}/label/labeled.xyz`),
  ];
  const last = rounds[rounds.length - 1];
  lines.push(`  the current data sets: rounds/r${last}/label/train.xyz and rounds/r${last}/label/test.xyz`);
  const underway = relabelSources(state).filter((k) => !rounds.includes(k));
  if (underway.length) lines.push(`  (the label stage of ${underway.map((k) => `r${k}`).join(', ')}, planned under the earlier settings, is relabeled too with --relabel)`);
  lines.push(
    'choose, then run again:',
    `  ratchet run ${c} --accept-revision   keep these labels and go on under revision ${r.number}`,
    `  ratchet run ${c} --relabel           label these frames again under revision ${r.number} in r${next}'s label stage; the earlier labels leave the data sets`,
  );
  return lines;
}

export interface RevisionChoice {
  campaignArg: string;
  acceptRevision?: boolean;
  relabel?: boolean;
}

/**
 * The run's revision step (after the campaign identity check, before 'run_started'): record a new
 * revision, note it, and record the person's choice or stop for one. Returns an exit code to stop with,
 * or undefined to go on.
 */
export async function revisionStep(engine: Engine, o: RevisionChoice, error: (m: string) => void): Promise<number | undefined> {
  const out = engine.out;
  const added = await recordRevision(engine);
  if (added && added.number > 1) {
    const rest = added.changes.length ? `: ${added.changes.slice(0, 3).map((k) => k.path).join(', ')}${added.changes.length > 3 ? ', ...' : ''}` : '';
    if (added.affects_data.length === 0 || !added.decision_needed) {
      const what = added.affects_data.length ? `; ${added.affects_data.length} affect(s) data, but no round has labels yet` : '';
      out.line(`campaign revision ${added.number} (${short(added.sha256)}) from round ${added.round}: ${added.changes.length} change(s)${rest}${what}`);
    }
  }
  const pending = pendingRevision(engine.state);
  if (!pending) {
    if (o.acceptRevision || o.relabel) out.line(`no campaign revision waits for a decision: ${o.relabel ? '--relabel' : '--accept-revision'} changes nothing`);
    return undefined;
  }
  if (!o.acceptRevision && !o.relabel) {
    for (const l of decisionMessage(engine.state, pending, o.campaignArg)) error(l);
    return 1;
  }
  const round = o.relabel ? relabelRound(engine.state) : frontier(engine.state).round;
  const rounds = o.relabel ? relabelSources(engine.state) : [];
  const ev: RevisionDecidedEvent = {
    type: 'revision_decided',
    sha256: pending.sha256,
    choice: o.relabel ? 'relabel' : 'accept',
    by: personName(),
    round,
    ...(o.relabel ? { rounds } : {}),
  };
  await engine.append(ev);
  out.line(
    o.relabel
      ? `campaign revision ${pending.number}: r${round}'s label stage labels the frames of ${rounds.map((k) => `r${k}`).join(', ')} again; earlier labels leave the data sets`
      : `campaign revision ${pending.number} accepted: the labels of ${labeledRounds(engine.state).map((k) => `r${k}`).join(', ')} stay in the data sets`,
  );
  return undefined;
}

/** --accept-revision and --relabel: at most one. */
export function revisionFlagsProblem(o: { acceptRevision?: boolean; relabel?: boolean }): string | undefined {
  return o.acceptRevision && o.relabel ? '--accept-revision and --relabel: choose one' : undefined;
}

// ---------------------------------------------------------------------------------------------
// ratchet revisions CAMPAIGN [A [B]]

export interface RevisionsReport {
  campaign: { name: string; file: string; sha256: string; recorded: boolean };
  revisions: {
    number: number;
    sha256: string;
    round: number;
    at: string;
    changes: number;
    affects_data: string[];
    decision?: { choice: string; by: string; round: number; at: string };
  }[];
  diff?: { from: { number: number; sha256: string }; to: { number: number; sha256: string }; changes: CampaignChange[] };
}

/** A revision named by its number or a sha256 prefix (the latest with that prefix). */
function findRevision(state: CampaignState, name: string): RevisionRecord | string {
  if (state.revisions.length === 0) return 'no revision is recorded yet: the next run or retry records the campaign file as revision 1';
  if (/^\d+$/.test(name) && name.length < 6) {
    const r = state.revisions.find((k) => k.number === Number(name));
    return r ?? `no revision ${name}: the campaign has revisions 1 to ${state.revisions.length}`;
  }
  if (!/^[0-9a-f]{4,64}$/i.test(name)) return `expected a revision number (1, 2, ...) or a sha256 prefix of at least 4 hex digits, found ${JSON.stringify(name)}`;
  const hits = state.revisions.filter((k) => k.sha256.startsWith(name.toLowerCase()));
  if (hits.length === 0) return `no revision's sha256 starts with ${name}`;
  const shas = new Set(hits.map((k) => k.sha256));
  if (shas.size > 1) return `${name} is the start of ${shas.size} revisions' sha256 (${[...shas].map(short).join(', ')}): give more digits`;
  return hits[hits.length - 1];
}

/** `ratchet revisions`: exit code 0, or 2 for bad input. */
export async function revisionsCommand(
  campaignArg: string,
  a: string | undefined,
  b: string | undefined,
  o: { json?: boolean; out: Output; error: (m: string) => void },
): Promise<number> {
  let view: CampaignView;
  let state: CampaignState;
  try {
    view = campaignView(await loadCampaign(campaignArg, { checkFiles: false }));
    state = (await foldLedger(view.dir, applyEvent, emptyState())).state;
  } catch (err) {
    if (err instanceof CampaignError || err instanceof LedgerError) {
      o.error(err.message);
      return 2;
    }
    throw err;
  }
  const other = identityProblem(view, state.identity);
  if (other) {
    o.error(other);
    return 2;
  }
  const report: RevisionsReport = {
    campaign: { name: view.name, file: campaignArg, sha256: view.sha256, recorded: state.revisions.some((r) => r.sha256 === view.sha256) },
    revisions: state.revisions.map((r) => ({
      number: r.number,
      sha256: r.sha256,
      round: r.round,
      at: r.at,
      changes: r.changes.length,
      affects_data: r.affects_data,
      ...(r.decided ? { decision: { choice: r.decided.choice, by: r.decided.by, round: r.decided.round, at: r.decided.at } } : {}),
    })),
  };
  if (a !== undefined) {
    const from = findRevision(state, a);
    if (typeof from === 'string') {
      o.error(`revision A: ${from}`);
      return 2;
    }
    const to = b === undefined ? inForce(state)! : findRevision(state, b);
    if (typeof to === 'string') {
      o.error(`revision B: ${to}`);
      return 2;
    }
    const x = await revisionCampaign(view.dir, from.sha256);
    const y = await revisionCampaign(view.dir, to.sha256);
    for (const [r, c] of [
      [from, x],
      [to, y],
    ] as const) {
      if (typeof c === 'string') {
        o.error(`revision ${r.number}: ${c}`);
        return 2;
      }
    }
    report.diff = {
      from: { number: from.number, sha256: from.sha256 },
      to: { number: to.number, sha256: to.sha256 },
      changes: diffCampaigns(x, y),
    };
  }
  if (o.json) {
    o.out.line(JSON.stringify(report, null, 2));
    return 0;
  }
  formatRevisions(report, o.out);
  return 0;
}

export function formatRevisions(r: RevisionsReport, out: Output): void {
  if (r.diff) {
    const d = r.diff;
    out.line(`revision ${d.from.number} (${short(d.from.sha256)}) -> revision ${d.to.number} (${short(d.to.sha256)}): ${d.changes.length} difference(s)`);
    for (const c of d.changes) out.line(`  ${describeChange(c)}`);
    return;
  }
  out.line(`campaign ${r.campaign.name} (${r.campaign.file}): ${r.revisions.length} revision(s)`);
  if (r.revisions.length) out.line(`  ${'rev'.padEnd(5)}${'sha256'.padEnd(14)}${'from'.padEnd(7)}${'changes'.padEnd(9)}decision`);
  for (const v of r.revisions) {
    const decision = v.decision ? `${v.decision.choice} by ${v.decision.by}${v.decision.choice === 'relabel' ? ` (in r${v.decision.round})` : ''}` : v.affects_data.length ? `${v.affects_data.length} affect data` : '';
    out.line(`  ${String(v.number).padEnd(5)}${short(v.sha256).padEnd(14)}${`r${v.round}`.padEnd(7)}${String(v.changes).padEnd(9)}${decision}`);
  }
  if (!r.campaign.recorded) out.line(`the campaign file as it is now (${short(r.campaign.sha256)}) is not recorded yet: the next run records it`);
}
