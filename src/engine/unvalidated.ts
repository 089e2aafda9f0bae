/**
 * A way forward from a committee whose validation fails (common with a first committee trained on a few
 * perturbed structures): with `rounds.explore_unvalidated.max_rounds` > 0 the round goes on past a failed
 * validate verdict, runs each condition for a short share of its steps (cut at contacts as every simulate
 * run is), and the next round labels what it found. The round is recorded as not validated
 * (`validation_waived` in the ledger), shown so in `status`, and never counts toward convergence (the
 * convergence test requires a passed validation). At most max_rounds rounds in a row may go on this way.
 */
import type { Campaign } from '../campaign/schema.js';
import type { ValidationWaivedEvent } from './events.js';
import { stageRecord, type CampaignState } from './state.js';

/** MD steps of a condition in a round that is not validated: a share of its steps, whole multiples of write_every, at least one. */
export function unvalidatedSteps(steps: number, writeEvery: number, fraction: number): number {
  const every = Math.max(1, writeEvery);
  const wanted = Math.round((steps * fraction) / every) * every;
  return Math.min(steps, Math.max(every, wanted));
}

/** Rounds before `round` that went on without validation, counted back from round - 1 while they did. */
export function unvalidatedInARow(state: CampaignState, round: number): number {
  let n = 0;
  for (let r = round - 1; r >= 0 && stageRecord(state, r, 'validate')?.waived; r--) n++;
  return n;
}

/** Whether the round's validate verdict was waived (the round explores but is not validated). */
export function isUnvalidated(state: CampaignState, round: number): boolean {
  return stageRecord(state, round, 'validate')?.waived !== undefined;
}

/**
 * The event that lets a failed validation of `round` go on, or a reason why not (the setting is off or
 * the rounds in a row are used up).
 */
export function waiveValidation(campaign: Campaign, state: CampaignState, round: number): { event: ValidationWaivedEvent } | { refused: string } {
  const x = campaign.rounds.explore_unvalidated;
  if (x.max_rounds === 0) return { refused: 'rounds.explore_unvalidated.max_rounds is 0' };
  const before = unvalidatedInARow(state, round);
  if (before + 1 > x.max_rounds) {
    return { refused: `${before} round(s) in a row already went on without validation (rounds.explore_unvalidated.max_rounds = ${x.max_rounds})` };
  }
  const steps: Record<string, number> = {};
  for (const c of campaign.conditions) steps[c.name] = unvalidatedSteps(c.steps, c.write_every, x.steps_fraction);
  return {
    event: {
      type: 'validation_waived',
      round,
      in_a_row: before + 1,
      steps,
      reason: `validation failed; rounds.explore_unvalidated lets round ${round} explore with short runs (${Math.round(x.steps_fraction * 100)}% of each condition's steps) and label what it finds; the round is not validated and cannot converge`,
    },
  };
}
