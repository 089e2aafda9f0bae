/**
 * `ratchet report`: the campaign's figures and charts as one self-contained HTML file (and, with
 * --json, the data behind every chart). Read-only: never takes the lock, so it works on a campaign
 * that is running or blocked and shows what there is.
 */
import { readLedger, LedgerError } from '../ledger/journal.js';
import { buildStatus } from '../engine/status.js';
import { foldEvents } from '../engine/state.js';
import { campaignView } from '../engine/view.js';
import { identityProblem } from '../engine/identity.js';
import { CampaignError, loadCampaign } from '../campaign/load.js';
import { collectReport, type CollectOptions, type ReportData } from './data.js';
import { reportCharts, renderSvg } from './charts.js';
import { renderHtml, type RenderedChart } from './html.js';

export { collectReport, type ReportData } from './data.js';
export { reportCharts, renderSvg } from './charts.js';

export interface Report {
  data: ReportData;
  charts: RenderedChart[];
  html: string;
}

/** A report that cannot be made: the campaign or its ledger cannot be read (exit 2). */
export class ReportError extends Error {
  override name = 'ReportError';
}

export interface ReportOptions extends CollectOptions {
  /** Time printed on the page (default now). */
  generatedAt?: string;
}

/** Build the report of a campaign file. Throws ReportError naming the file for bad input. */
export async function buildReport(campaignFile: string, opts: ReportOptions = {}): Promise<Report> {
  // The ledger is read once: folded into the state `ratchet status` shows, and kept for the figures.
  let view;
  try {
    view = campaignView(await loadCampaign(campaignFile, { checkFiles: false }));
  } catch (err) {
    if (err instanceof CampaignError) throw new ReportError(err.message);
    throw err;
  }
  let events, torn;
  try {
    ({ events, torn } = await readLedger(view.dir));
  } catch (err) {
    if (err instanceof LedgerError) throw new ReportError(err.message);
    throw err;
  }
  const state = foldEvents(events);
  const other = identityProblem(view, state.identity);
  if (other) throw new ReportError(other);
  const status = buildStatus(view, state, campaignFile);
  if (torn) status.ledger.torn_line = torn.line;
  const data = await collectReport(status, events, opts);
  const charts: RenderedChart[] = [];
  for (const c of reportCharts(data)) {
    charts.push({ id: c.id, title: c.title, caption: c.caption, svg: c.spec ? await renderSvg(c.spec) : null, ...(c.empty ? { empty: c.empty } : {}) });
  }
  return { data, charts, html: renderHtml(data, charts, opts.generatedAt ?? new Date().toISOString()) };
}
