/**
 * `ratchet report`: the campaign's figures and charts as one self-contained HTML file (and, with
 * --json, the data behind every chart). Read-only: never takes the lock, so it works on a campaign
 * that is running or blocked and shows what there is.
 */
import { readLedger, LedgerError } from '../ledger/journal.js';
import { campaignStatus } from '../engine/status.js';
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
  const errors: string[] = [];
  const st = await campaignStatus(campaignFile, (m) => errors.push(m));
  if (!st.report) throw new ReportError(errors.join('\n') || `${campaignFile}: cannot read the campaign`);
  let events;
  try {
    events = (await readLedger(st.report.campaign.dir)).events;
  } catch (err) {
    if (err instanceof LedgerError) throw new ReportError(err.message);
    throw err;
  }
  const data = await collectReport(st.report, events, opts);
  const charts: RenderedChart[] = [];
  for (const c of reportCharts(data)) {
    charts.push({ id: c.id, title: c.title, caption: c.caption, svg: c.spec ? await renderSvg(c.spec) : null, ...(c.empty ? { empty: c.empty } : {}) });
  }
  return { data, charts, html: renderHtml(data, charts, opts.generatedAt ?? new Date().toISOString()) };
}
