/**
 * Convergence of a campaign: the potential is trusted when, in the latest round, every exploration
 * condition's confident fraction reaches the target, no frame ran away, and validation passed.
 */

export interface ConditionBands {
  condition: string;
  frames: number;
  confident: number;
  informative: number;
  runaway: number;
  /** The frame where the simulate gate cut this condition's trajectory at a contact violation, if it did. */
  truncatedAt?: number | null;
}

export interface ConvergenceInput {
  /** The round just finished (0-based). */
  round: number;
  /** The campaign's round limit: rounds 0 .. maxRounds-1 may run. */
  maxRounds: number;
  /** Confident fraction every condition must reach (default 0.99). */
  target: number;
  conditions: ConditionBands[];
  validationPassed: boolean;
}

export interface Convergence {
  state: 'converged' | 'continue' | 'exhausted';
  /** Conditions that keep the campaign from converging. */
  holding: string[];
  /** Plain-words reasons, one per problem. */
  reasons: string[];
}

export function confidentFraction(c: ConditionBands): number {
  return c.frames === 0 ? 0 : c.confident / c.frames;
}

export function assessConvergence(input: ConvergenceInput): Convergence {
  const holding: string[] = [];
  const reasons: string[] = [];
  for (const c of input.conditions) {
    const f = confidentFraction(c);
    const problems: string[] = [];
    if (c.frames === 0) problems.push('no frames');
    else if (f < input.target) problems.push(`confident fraction ${f.toFixed(3)} < ${input.target}`);
    if (c.runaway > 0) problems.push(`${c.runaway} runaway frame${c.runaway === 1 ? '' : 's'}`);
    if (typeof c.truncatedAt === 'number')
      problems.push(`its run was cut at frame ${c.truncatedAt} because two atoms came too close, so it did not finish`);
    if (problems.length > 0) {
      holding.push(c.condition);
      reasons.push(`${c.condition}: ${problems.join(', ')}`);
    }
  }
  if (input.conditions.length === 0) reasons.push('no exploration results yet');
  if (!input.validationPassed) reasons.push('validation did not pass');
  if (reasons.length === 0) return { state: 'converged', holding, reasons };
  const last = input.round + 1 >= input.maxRounds;
  return { state: last ? 'exhausted' : 'continue', holding, reasons };
}
