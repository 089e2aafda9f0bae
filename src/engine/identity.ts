/**
 * One state per campaign file. A folder's ledger (`.ratchet/ledger.jsonl`) and `rounds/` belong to the
 * campaign file that created them, recorded in the ledger as a 'campaign_identity' event (its name,
 * its file name relative to the folder, its path). Another campaign file in the same folder is refused
 * by every command that reads or writes the state (run, retry, run --dry-run, status, lineage): two
 * campaigns never share, or silently read, one state. Editing the campaign file between runs is a
 * revision of the same campaign, not another campaign: only the file's name is compared, so the folder
 * may also be moved or copied whole.
 *
 * A ledger written before campaigns were recorded carries no identity: the first `run` or `retry`
 * adopts it for its campaign file and records that (`adopted: true`); read-only commands accept it.
 */
import { basename, relative, sep } from 'node:path';
import { foldLedger } from '../ledger/journal.js';
import type { LedgerEvent } from '../ledger/journal.js';
import type { CampaignIdentityEvent } from './events.js';
import type { CampaignView } from './view.js';

/** Another campaign file's state: bad input, exit code 2. */
export class CampaignIdentityError extends Error {
  readonly exitCode = 2;
  override name = 'CampaignIdentityError';
}

/** The campaign file's name relative to its folder ('/'-separated). */
export function campaignFileName(view: Pick<CampaignView, 'dir' | 'file'>): string {
  const r = relative(view.dir, view.file);
  return r === '' || r.startsWith('..') ? basename(view.file) : r.split(sep).join('/');
}

/** The event that binds a folder's state to this campaign file. */
export function identityEvent(view: Pick<CampaignView, 'dir' | 'file' | 'name'>, adopted: boolean): CampaignIdentityEvent {
  return { type: 'campaign_identity', name: view.name, file: campaignFileName(view), path: view.file, ...(adopted ? { adopted: true as const } : {}) };
}

/**
 * Undefined when this campaign file may use the folder's state (it owns it, or no owner is recorded);
 * else the refusal, naming both files and what to do.
 */
export function identityProblem(
  view: Pick<CampaignView, 'dir' | 'file' | 'name'>,
  recorded: Pick<CampaignIdentityEvent, 'name' | 'file' | 'path'> | undefined,
): string | undefined {
  if (!recorded) return undefined;
  const mine = campaignFileName(view);
  if (recorded.file === mine) return undefined;
  return (
    `${view.file}: the folder ${view.dir} already holds the state (.ratchet/ledger.jsonl, rounds/) of another campaign file, ` +
    `${recorded.file} (campaign ${JSON.stringify(recorded.name)}); one folder holds one campaign's state, never a shared one.\n` +
    `  A campaign's ledger and rounds are kept beside its file: put ${mine} in a folder of its own ` +
    `(e.g. ${view.dir}${sep}${mine.replace(/\.[^./]*$/, '')}${sep}${mine}, with the files it names) and run it there; ` +
    `if ${mine} is ${recorded.file} renamed, give it back its name ${recorded.file}.`
  );
}

/** Throws CampaignIdentityError when `identityProblem` finds one. */
export function checkIdentity(view: Pick<CampaignView, 'dir' | 'file' | 'name'>, recorded: Pick<CampaignIdentityEvent, 'name' | 'file' | 'path'> | undefined): void {
  const p = identityProblem(view, recorded);
  if (p) throw new CampaignIdentityError(p);
}

/** The identity recorded in a folder's ledger (read-only, no lock), or undefined (no ledger, or none recorded). */
export async function readIdentity(dir: string): Promise<(CampaignIdentityEvent & { seq: number }) | undefined> {
  const r = await foldLedger<(CampaignIdentityEvent & { seq: number }) | undefined>(
    dir,
    (found, e: LedgerEvent) => (found === undefined && e.type === 'campaign_identity' && typeof e.file === 'string' ? (e as unknown as CampaignIdentityEvent & { seq: number }) : found),
    undefined,
  );
  return r.state;
}
