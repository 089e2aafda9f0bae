/**
 * The ledger concern: journal (append-only JSONL with one writer), lock, artifact hashing, lineage.
 *
 *   const j = await Journal.open(campaignDir);            // takes .ratchet/lock (LockError if held)
 *   await j.append({ type: 'task', task: 'r0/label/0003', state: 'succeeded' });  // -> { seq, at, ... }
 *   await j.append(await artifactEvent({ campaignDir, path, role: 'labeled', task, inputs, command, campaign_sha256 }));
 *   await j.close();
 *   const { events, torn } = await readLedger(campaignDir); // read-only, no lock
 *   const tree = upstream(events, 'rounds/0/train/0000/model.json');
 */
export * from './lock.js';
export * from './journal.js';
export * from './artifacts.js';
export * from './lineage.js';
