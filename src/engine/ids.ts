/**
 * Names and numbers of the campaign's places: stages in their order, task ids ("r0/label/0003"),
 * and the `--stop-before` / `--stop-after` stop point. Pure functions.
 */

export const STAGES = ['sample', 'label', 'train', 'validate', 'simulate'] as const;
export type Stage = (typeof STAGES)[number];

export function isStage(s: string): s is Stage {
  return (STAGES as readonly string[]).includes(s);
}

export function stageIndex(s: Stage): number {
  return STAGES.indexOf(s);
}

/** "0003" for index 3 (at least four digits; more when a stage has 10,000 tasks or more). */
export function taskName(index: number, count: number): string {
  const width = Math.max(4, String(Math.max(count - 1, 0)).length);
  return String(index).padStart(width, '0');
}

/** "r0/label/0003". */
export function taskId(round: number, stage: Stage, name: string): string {
  return `r${round}/${stage}/${name}`;
}

/** "r0/label". */
export function stageId(round: number, stage: Stage): string {
  return `r${round}/${stage}`;
}

export interface TaskRef {
  round: number;
  stage: Stage;
  /** Absent when the reference names a whole stage. */
  task?: string;
}

/**
 * Parse "r0/label/0003" or "r0/label" (also "0/label"). Returns undefined when it is neither.
 * A task name is a zero-padded index or a condition name: any characters but '/'.
 */
export function parseTaskRef(text: string): TaskRef | undefined {
  const m = /^r?(\d+)\/([a-z]+)(?:\/([^/]+))?$/.exec(text.trim());
  if (!m || !isStage(m[2])) return undefined;
  const ref: TaskRef = { round: Number(m[1]), stage: m[2] };
  if (m[3] !== undefined) ref.task = m[3];
  return ref;
}

/** A place in the campaign: a stage of a round. Compares in run order. */
export interface Point {
  round: number;
  stage: Stage;
}

export function comparePoints(a: Point, b: Point): number {
  return a.round !== b.round ? a.round - b.round : stageIndex(a.stage) - stageIndex(b.stage);
}

/**
 * What `--stop-before` (or `--stop-after`, with `after`) names: a round ("2"), a stage of a round
 * ("r1/train") or a stage ("train": the next one).
 */
export type Until = ({ round: number; stage?: Stage } | { stage: Stage; round?: undefined }) & { after?: boolean };

export function parseUntil(text: string): Until | undefined {
  const t = text.trim();
  if (/^r?\d+$/.test(t)) return { round: Number(t.replace(/^r/, '')) };
  if (isStage(t)) return { stage: t };
  const ref = parseTaskRef(t);
  if (ref && ref.task === undefined) return { round: ref.round, stage: ref.stage };
  return undefined;
}

/**
 * The first point at which work must stop, given where the campaign is now.
 * A bare stage means its next occurrence at or after `now` (so `--stop-before train` while train runs stops at once).
 */
export function untilPoint(until: Until, now: Point): Point {
  let p: Point;
  if (until.round === undefined) {
    const round = stageIndex(until.stage) >= stageIndex(now.stage) ? now.round : now.round + 1;
    p = { round, stage: until.stage };
  } else if (until.after && until.stage === undefined) {
    // --stop-after 2: the whole of round 2 runs.
    return { round: until.round + 1, stage: 'sample' };
  } else {
    p = { round: until.round, stage: until.stage ?? 'sample' };
  }
  return until.after ? nextPoint(p) : p;
}

/** The point that follows p in run order. */
export function nextPoint(p: Point): Point {
  const k = stageIndex(p.stage);
  return k + 1 < STAGES.length ? { round: p.round, stage: STAGES[k + 1] } : { round: p.round + 1, stage: 'sample' };
}

export function describeUntil(u: Until): string {
  if (u.round === undefined) return `the next ${u.stage} stage`;
  return u.stage ? `r${u.round}/${u.stage}` : `round ${u.round}`;
}
