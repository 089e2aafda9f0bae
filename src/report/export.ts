/**
 * `ratchet export`: hand a campaign over as one folder.
 *
 *   DIR/committee/<task>/<name>   the round's committee (each model as registered: file or folder)
 *   DIR/data/train.xyz            the full labeled training set of that round (extended XYZ)
 *   DIR/data/test.xyz             the held-out frames, apart
 *   DIR/campaign.yaml             the campaign file (named as the original)
 *   DIR/report.html               the campaign's report (src/report/index.ts)
 *   DIR/provenance.prov.json      W3C PROV-JSON of the committee's lineage (src/ledger/prov.ts)
 *   DIR/manifest.json             every file above with its sha256 and size, the round, the tool version
 *
 * Each copied artifact is hashed as it is copied and must match the id the ledger registered, so a
 * bundle never carries a file changed after ratchet recorded it. verifyBundle() re-checks a bundle
 * against its manifest: every file present with its hash, nothing extra.
 */
import { createHash } from 'node:crypto';
import { promises as fsp } from 'node:fs';
import { basename, dirname, join, relative, resolve, sep } from 'node:path';
import { hashArtifact, hashFile, idHex, type ArtifactEvent } from '../ledger/artifacts.js';
import { readLedger } from '../ledger/journal.js';
import { lineageGraph, upstream, type LineageNode } from '../ledger/lineage.js';
import { provDocument, taskTimes } from '../ledger/prov.js';
import { VERSION } from '../version.js';
import { buildReport } from './index.js';

export const MANIFEST = 'manifest.json';
export const BUNDLE_FORMAT = 'ratchet-export-v1';

export class ExportError extends Error {
  override name = 'ExportError';
}

export interface ManifestFile {
  path: string;
  sha256: string;
  bytes: number;
  /** What it is: model, training_set, test_set, campaign, report, provenance. */
  role: string;
  /** The registered artifact it was copied from. */
  source?: { path: string; id: string };
}

export interface Manifest {
  format: string;
  tool_version: string;
  created: string;
  campaign: { name: string; file: string; sha256: string };
  round: number;
  /** The round's validate verdict, or null when it was never judged. */
  validation: string | null;
  files: ManifestFile[];
}

export interface ExportOptions {
  round?: number;
  created?: string;
}

async function sha(path: string): Promise<{ sha256: string; bytes: number }> {
  return hashFile(path);
}

/** Every regular file below a folder, '/'-separated relative paths, sorted. */
async function filesBelow(root: string): Promise<string[]> {
  const out: string[] = [];
  const walk = async (d: string) => {
    for (const it of await fsp.readdir(d, { withFileTypes: true })) {
      const p = join(d, it.name);
      if (it.isDirectory()) await walk(p);
      else out.push(relative(root, p).split(sep).join('/'));
    }
  };
  await walk(root);
  return out.sort();
}

/** Write the bundle of a campaign's round (default: the latest round with a trained committee). */
export async function exportCampaign(campaignFile: string, outDir: string, opts: ExportOptions = {}): Promise<Manifest> {
  const existing = await fsp.readdir(outDir).catch(() => null);
  if (existing && existing.length) throw new ExportError(`${outDir}: the folder is not empty; give a new or empty folder for the bundle`);
  // The report loads and checks the campaign (identity, ledger) and fails with a clear message.
  const report = await buildReport(campaignFile, { generatedAt: opts.created });
  const dir = report.data.campaign.dir;
  const { events } = await readLedger(dir);
  const g = lineageGraph(events);
  const models = new Map<number, ArtifactEvent[]>();
  for (const a of g.byPath.values()) {
    const m = a.role === 'model' && typeof a.task === 'string' ? /^r(\d+)\/train\//.exec(a.task) : null;
    if (!m) continue;
    const r = Number(m[1]);
    if (!models.has(r)) models.set(r, []);
    models.get(r)!.push(a);
  }
  const rounds = [...models.keys()].sort((a, b) => a - b);
  if (!rounds.length) throw new ExportError(`${dir}: the ledger records no trained model yet: nothing to export`);
  const round = opts.round ?? rounds[rounds.length - 1];
  const committee = (models.get(round) ?? []).sort((a, b) => (a.task! < b.task! ? -1 : 1));
  if (!committee.length) throw new ExportError(`--round ${round}: no committee was trained in that round (rounds with one: ${rounds.join(', ')})`);
  const train = g.byPath.get(`rounds/r${round}/label/train.xyz`);
  const test = g.byPath.get(`rounds/r${round}/label/test.xyz`);
  if (!train) throw new ExportError(`round ${round}: no training set (rounds/r${round}/label/train.xyz) is registered`);
  const validation = events.filter((e) => e.type === 'stage_gated' && e.round === round && e.stage === 'validate').at(-1);

  await fsp.mkdir(outDir, { recursive: true });
  const files: ManifestFile[] = [];
  const copyArtifact = async (a: ArtifactEvent, to: string, role: string) => {
    const src = join(dir, a.path);
    const h = await hashArtifact(src).catch(() => null);
    if (!h) throw new ExportError(`${src}: registered as ${a.id} (ledger seq ${a.seq}) but missing; run ratchet audit`);
    if (h.sha256 !== idHex(a.id)) throw new ExportError(`${src}: changed since it was registered (registered ${a.id}, now sha256:${h.sha256}); run ratchet audit`);
    const dest = join(outDir, to);
    await fsp.mkdir(dirname(dest), { recursive: true });
    await fsp.cp(src, dest, { recursive: true });
    if (h.kind === 'dir') {
      for (const f of await filesBelow(dest)) files.push({ path: `${to}/${f}`, ...(await sha(join(dest, f))), role, source: { path: `${a.path}/${f}`, id: a.id } });
    } else files.push({ path: to, ...(await sha(dest)), role, source: { path: a.path, id: a.id } });
  };
  for (const m of committee) await copyArtifact(m, `committee/${m.task!.split('/').slice(2).join('/')}/${basename(m.path)}`, 'model');
  await copyArtifact(train, 'data/train.xyz', 'training_set');
  if (test) await copyArtifact(test, 'data/test.xyz', 'test_set');
  const write = async (to: string, text: string, role: string) => {
    await fsp.writeFile(join(outDir, to), text);
    files.push({ path: to, ...(await sha(join(outDir, to))), role });
  };
  const campaignText = await fsp.readFile(resolve(campaignFile));
  const campaignName = basename(campaignFile);
  await fsp.writeFile(join(outDir, campaignName), campaignText);
  files.push({ path: campaignName, ...(await sha(join(outDir, campaignName))), role: 'campaign' });
  await write('report.html', report.html, 'report');
  const trees = committee.map((m) => upstream(g, m.id)).filter((t): t is LineageNode => !!t);
  await write('provenance.prov.json', JSON.stringify(provDocument(trees, taskTimes(events), { toolVersion: VERSION }), null, 1) + '\n', 'provenance');
  const manifest: Manifest = {
    format: BUNDLE_FORMAT,
    tool_version: VERSION,
    created: opts.created ?? new Date().toISOString(),
    campaign: { name: report.data.campaign.name, file: campaignName, sha256: createHash('sha256').update(campaignText).digest('hex') },
    round,
    validation: typeof validation?.verdict === 'string' ? validation.verdict : null,
    files: files.sort((a, b) => (a.path < b.path ? -1 : 1)),
  };
  await fsp.writeFile(join(outDir, MANIFEST), JSON.stringify(manifest, null, 1) + '\n');
  return manifest;
}

export interface VerifyResult {
  dir: string;
  files: number;
  ok: number;
  missing: string[];
  changed: { path: string; expected: string; now: string }[];
  extra: string[];
  clean: boolean;
}

/** Re-check a bundle against its manifest. Throws ExportError when there is no readable manifest. */
export async function verifyBundle(dir: string): Promise<VerifyResult> {
  let m: Manifest;
  try {
    m = JSON.parse(await fsp.readFile(join(dir, MANIFEST), 'utf8'));
  } catch (err) {
    throw new ExportError(`${join(dir, MANIFEST)}: cannot read the bundle's manifest (${(err as Error).message}); expected a folder written by ratchet export`);
  }
  if (m.format !== BUNDLE_FORMAT || !Array.isArray(m.files)) {
    throw new ExportError(`${join(dir, MANIFEST)}: "format" should be "${BUNDLE_FORMAT}" with a "files" list, found ${JSON.stringify(m.format)}`);
  }
  const res: VerifyResult = { dir, files: m.files.length, ok: 0, missing: [], changed: [], extra: [], clean: false };
  const listed = new Set<string>([MANIFEST]);
  for (const f of m.files) {
    listed.add(f.path);
    const h = await sha(join(dir, f.path)).catch(() => null);
    if (!h) res.missing.push(f.path);
    else if (h.sha256 !== f.sha256) res.changed.push({ path: f.path, expected: f.sha256, now: h.sha256 });
    else res.ok++;
  }
  for (const f of await filesBelow(dir)) if (!listed.has(f)) res.extra.push(f);
  res.clean = !res.missing.length && !res.changed.length && !res.extra.length;
  return res;
}

export function renderVerify(r: VerifyResult): string {
  const L = [`bundle ${r.dir}: ${r.files} file(s) in the manifest, ${r.ok} match their sha256`];
  for (const p of r.missing) L.push(`  missing  ${p}`);
  for (const c of r.changed) L.push(`  changed  ${c.path}  (manifest ${c.expected.slice(0, 12)}, now ${c.now.slice(0, 12)})`);
  for (const p of r.extra) L.push(`  extra    ${p}  (not in the manifest)`);
  L.push(r.clean ? 'verified' : 'NOT verified');
  return L.join('\n') + '\n';
}
