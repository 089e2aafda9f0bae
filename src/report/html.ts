/**
 * The report page: one self-contained HTML file. Charts are inline SVG, the style sheet is inline,
 * there is no script and no external reference (no fonts, images or links that load anything), so
 * it opens offline and can be mailed or archived as it is.
 */
import type { ReportData } from './data.js';

export interface RenderedChart {
  id: string;
  title: string;
  caption: string;
  svg: string | null;
  empty?: string;
}

export function esc(s: unknown): string {
  return String(s).replace(/[&<>"']/g, (c) => ({ '&': '&amp;', '<': '&lt;', '>': '&gt;', '"': '&quot;', "'": '&#39;' })[c]!);
}

const STYLE = `body{font-family:system-ui,sans-serif;margin:2em auto;max-width:1200px;color:#222;padding:0 1em}
h1{margin-bottom:.2em}h2{margin-top:2em;border-bottom:1px solid #ddd}
figure{margin:1.5em 0}figcaption{color:#555;font-size:.9em;max-width:60em}
.caution{background:#fff4e0;border-left:4px solid #e0a800;padding:.5em 1em}
table{border-collapse:collapse;font-size:.85em}td,th{border:1px solid #ddd;padding:.2em .5em;vertical-align:top;text-align:left}
.pass{color:#2e7d32}.warn{color:#b26a00}.fail{color:#c62828;font-weight:bold}
pre{white-space:pre-wrap;max-width:60em;font-size:.85em;margin:0}.empty{color:#777;font-style:italic}
dl{display:grid;grid-template-columns:max-content auto;gap:.2em 1em}dt{font-weight:bold}`;

function figure(c: RenderedChart): string {
  const body = c.svg ?? `<p class="empty">No chart yet: ${esc(c.empty ?? 'no data')}.</p>`;
  return `<figure data-chart="${esc(c.id)}"${c.svg ? '' : ' data-empty="true"'}>\n<h3>${esc(c.title)}</h3>\n${body}\n<figcaption>${esc(c.caption)}</figcaption>\n</figure>`;
}

export function renderHtml(d: ReportData, charts: RenderedChart[], generatedAt: string): string {
  const byId = new Map(charts.map((c) => [c.id, c]));
  const section = (title: string, ids: string[], extra = ''): string =>
    `<section>\n<h2>${esc(title)}</h2>\n${ids.map((i) => byId.get(i)).filter((c): c is RenderedChart => !!c).map(figure).join('\n')}${extra}\n</section>`;
  const budget =
    `<dl><dt>core-hours used</dt><dd>${d.budget.total_used.toFixed(3)}${d.budget.unknown_attempts ? ` (${d.budget.unknown_attempts} attempt(s) not measured: no exit record)` : ''}</dd>` +
    `<dt>campaign budget</dt><dd>${d.budget.core_hours ?? 'none set'}</dd><dt>per-round budget</dt><dd>${d.budget.core_hours_per_round ?? 'none set'}</dd></dl>`;
  const rej = d.rejections.length
    ? `<h3>Rejection reasons</h3><table><tr><th>round</th><th>reason</th><th>frames</th></tr>${d.rejections.map((r) => `<tr><td>${r.round}</td><td>${esc(r.reason)}</td><td>${r.count}</td></tr>`).join('')}</table>`
    : '<p>No frame was rejected by the label gate.</p>';
  const verdicts = d.verdicts.length
    ? `<table data-table="verdicts"><tr><th>seq</th><th>stage</th><th>gate</th><th>task</th><th>verdict</th><th>reasons</th><th>figures</th></tr>${d.verdicts
        .map(
          (v) =>
            `<tr><td>${v.seq}</td><td>r${v.round}/${esc(v.stage)}</td><td>${esc(v.gate)}</td><td>${esc(v.task ?? '')}</td><td class="${esc(v.verdict)}">${esc(v.verdict)}</td><td>${v.reasons.map(esc).join('<br>')}</td><td><details><summary>figures</summary><pre>${esc(JSON.stringify(v.figures, null, 1))}</pre></details></td></tr>`,
        )
        .join('\n')}</table>`
    : '<p>No stage has been judged yet.</p>';
  return `<!doctype html>
<html lang="en">
<head>
<meta charset="utf-8">
<meta name="viewport" content="width=device-width, initial-scale=1">
<meta name="generator" content="ratchet ${esc(d.tool_version)}">
<title>ratchet report: ${esc(d.campaign.name)}</title>
<style>${STYLE}</style>
</head>
<body>
<h1>Campaign ${esc(d.campaign.name)}</h1>
<dl>
<dt>state</dt><dd>${esc(d.state)}</dd>
<dt>campaign file</dt><dd>${esc(d.campaign.file)} (sha256 ${esc(d.campaign.sha256.slice(0, 12))})</dd>
<dt>conditions</dt><dd>${d.conditions.map(esc).join(', ')}</dd>
<dt>report made</dt><dd>${esc(generatedAt)} by ratchet ${esc(d.tool_version)}</dd>
</dl>
<div class="caution" data-cautions>${d.cautions.map((c) => `<p>${esc(c)}</p>`).join('')}</div>
${section('Exploration', ['confident', 'spread'])}
${section('Accuracy', ['errors_round', 'errors_frames', 'parity_forces', 'parity_energy'])}
${section('Stability', ['drift'])}
${section('Data', ['counts'], rej)}
${section('Cost', ['core_hours', 'core_hours_total'], budget)}
${section('Provenance', ['lineage'])}
<section data-revisions>
<h2>Campaign revisions</h2>
${revisionsTable(d)}
</section>
<section>
<h2>Every gate verdict</h2>
${verdicts}
</section>
</body>
</html>
`;
}

/** Which version of the campaign file each round ran under, what changed and what the person chose. */
function revisionsTable(d: ReportData): string {
  const list = d.revisions ?? [];
  if (list.length === 0) return '<p>No revision recorded yet (recorded from the next run on).</p>';
  const rows = list
    .map((v) => {
      const choice = v.pending ? 'waits for --accept-revision or --relabel' : v.decision ? `${v.decision.choice} (by ${v.decision.by})` : v.affects_data.length ? '' : 'future only';
      return `<tr><td>${v.number}</td><td><code>${esc(v.sha256.slice(0, 12))}</code></td><td>r${v.round}</td><td>${v.changes}</td><td>${esc(v.affects_data.join(', '))}</td><td>${esc(choice)}</td><td>${v.rounds.map((r) => `r${r}`).join(', ')}</td></tr>`;
    })
    .join('\n');
  return `<table><thead><tr><th>revision</th><th>sha256</th><th>from</th><th>changes</th><th>affects data made</th><th>decision</th><th>rounds run under it</th></tr></thead><tbody>\n${rows}\n</tbody></table>\n<p>The differences: <code>ratchet revisions CAMPAIGN A B</code>.</p>`;
}
