/**
 * The report's charts: one Vega-Lite specification per chart, built from ReportData and rendered to
 * SVG in Node by Vega (no browser, no network). Only the data and the encodings are ours; binning,
 * scales, axes, legends and layout are the library's.
 */
import * as vega from 'vega';
import { compile, type TopLevelSpec } from 'vega-lite';
import type { ReportData } from './data.js';

export interface Chart {
  /** Stable id: the figure's data-chart attribute in the HTML. */
  id: string;
  title: string;
  /** What the chart shows, one or two sentences under it. */
  caption: string;
  spec: TopLevelSpec | null;
  /** Why there is no chart (no data yet). */
  empty?: string;
}

const W = 520;
const H = 260;

/** All charts of a report, in page order (a chart with no data has spec null and says why). */
export function reportCharts(d: ReportData): Chart[] {
  return [confidentChart(d), spreadChart(d), ...errorCharts(d), ...parityCharts(d), driftChart(d), countsChart(d), ...coreHourCharts(d), lineageChart(d)];
}

function none(id: string, title: string, caption: string, why: string): Chart {
  return { id, title, caption, spec: null, empty: why };
}

/** A Vega-Lite v6 specification (the $schema every chart carries). */
function vegaLite(body: object): TopLevelSpec {
  return { $schema: 'https://vega.github.io/schema/vega-lite/v6.json', ...body } as TopLevelSpec;
}

/** A chart with data. */
function chart(id: string, title: string, caption: string, body: object): Chart {
  return { id, title, caption, spec: vegaLite(body) };
}

function confidentChart(d: ReportData): Chart {
  const id = 'confident';
  const title = 'Confident fraction per condition';
  const caption = `Fraction of each condition's kept frames whose committee spread is below the window; the campaign converges when every condition reaches ${d.target}.`;
  const rows = d.confident.filter((c) => c.fraction !== null);
  if (!rows.length) return none(id, title, caption, 'no simulate stage has been judged yet');
  return chart(id, title, caption, {
      width: W,
      height: H,
      layer: [
        {
          data: { values: rows },
          mark: { type: 'line', point: true },
          encoding: {
            x: { field: 'round', type: 'quantitative', axis: { tickMinStep: 1, format: 'd' }, title: 'round' },
            y: { field: 'fraction', type: 'quantitative', scale: { domain: [0, 1] }, title: 'confident fraction' },
            color: { field: 'condition', type: 'nominal' },
          },
        },
        {
          data: { values: [{ target: d.target, label: `target ${d.target}` }] },
          layer: [
            { mark: { type: 'rule', strokeDash: [6, 4], color: 'black' }, encoding: { y: { field: 'target', type: 'quantitative' } } },
            { mark: { type: 'text', align: 'left', dx: 4, dy: -6, x: 0 }, encoding: { y: { field: 'target', type: 'quantitative' }, text: { field: 'label' } } },
          ],
        },
      ],
  });
}

function spreadChart(d: ReportData): Chart {
  const id = 'spread';
  const title = 'Committee spread per condition and round';
  const caption =
    'Histogram of the kept frames\' spread (max over atoms of the per-atom committee force deviation), coloured by band; the dashed rules are the window\'s lower and upper edges: confident below, informative inside, runaway above.';
  if (!d.spreads.length) return none(id, title, caption, 'no committee spreads recorded yet');
  const rounds = new Set(d.spreads.map((x) => x.round)).size;
  if (rounds > MAX_HISTOGRAM_ROWS) return spreadHeatmap(d, id, title);
  return chart(id, title, caption, {
      data: { values: d.spreads },
      facet: { row: { field: 'round', type: 'ordinal', title: 'round' }, column: { field: 'condition', type: 'nominal', title: 'condition' } },
      spec: {
        width: 220,
        height: 90,
        layer: [
          {
            mark: 'bar',
            encoding: {
              x: { field: 'spread_eV_per_A', bin: { maxbins: 30 }, type: 'quantitative', title: 'spread (eV/Å)' },
              y: { aggregate: 'count', type: 'quantitative', title: 'frames' },
              color: {
                field: 'band',
                type: 'nominal',
                scale: { domain: ['confident', 'informative', 'runaway'], range: ['#4c9a2a', '#e0a800', '#c0392b'] },
                title: 'band',
              },
            },
          },
          { mark: { type: 'rule', strokeDash: [4, 3], color: 'black' }, encoding: { x: { aggregate: 'min', field: 'lower', type: 'quantitative' } } },
          { mark: { type: 'rule', strokeDash: [4, 3], color: 'black' }, encoding: { x: { aggregate: 'min', field: 'upper', type: 'quantitative' } } },
        ],
      },
      resolve: { scale: { y: 'independent' } },
  });
}

/** Above this many rounds the spread histograms become one heat map per condition (rows would not fit). */
export const MAX_HISTOGRAM_ROWS = 8;

function spreadHeatmap(d: ReportData, id: string, title: string): Chart {
  const caption =
    'Distribution of the kept frames\' spread (max over atoms of the per-atom committee force deviation) per condition and round: each column is one round\'s histogram, its shade the number of frames in the bin; the dashed lines are the window\'s lower and upper edges: confident below, informative between, runaway above.';
  const edges = d.windows.flatMap((w) => [
    { round: w.round, edge: w.lower, label: 'lower edge' },
    { round: w.round, edge: w.upper, label: 'upper edge' },
  ]);
  const rows = d.spreads.map((x) => ({ round: x.round, condition: x.condition, spread_eV_per_A: x.spread_eV_per_A }));
  const last = d.windows[d.windows.length - 1];
  const bands = last
    ? [
        { text: 'confident', y: last.lower / 2 },
        { text: 'informative', y: (last.lower + last.upper) / 2 },
        { text: 'runaway', y: last.upper * 1.08 },
      ].flatMap((b) => d.conditions.map((c) => ({ round: last.round, condition: c, spread_eV_per_A: b.y, kind: 'band', text: b.text })))
    : [];
  return chart(id, title, caption, {
      facet: { column: { field: 'condition', type: 'nominal', title: 'condition' } },
      data: { values: rows.map((r) => ({ ...r, kind: 'frame' })).concat(edges.flatMap((e) => d.conditions.map((c) => ({ round: e.round, condition: c, spread_eV_per_A: e.edge, kind: e.label }))))
          .concat(bands as never[]) },
      spec: {
        width: 260,
        height: 220,
        layer: [
          {
            transform: [{ filter: "datum.kind === 'frame'" }],
            mark: 'rect',
            encoding: {
              x: { field: 'round', type: 'quantitative', bin: { step: 1 }, title: 'round' },
              y: { field: 'spread_eV_per_A', type: 'quantitative', bin: { maxbins: 30 }, title: 'spread (eV/Å)' },
              color: { aggregate: 'count', type: 'quantitative', title: 'frames', scale: { scheme: 'blues' } },
            },
          },
          {
            transform: [{ filter: "datum.kind === 'lower edge' || datum.kind === 'upper edge'" }],
            mark: { type: 'line', strokeDash: [4, 3], color: 'black', interpolate: 'step-after' },
            encoding: {
              x: { field: 'round', type: 'quantitative' },
              y: { field: 'spread_eV_per_A', type: 'quantitative' },
              detail: { field: 'kind' },
            },
          },
          {
            transform: [{ filter: "datum.kind === 'band'" }],
            mark: { type: 'text', align: 'right', dx: -2, fontWeight: 'bold' },
            encoding: { x: { field: 'round', type: 'quantitative' }, y: { field: 'spread_eV_per_A', type: 'quantitative' }, text: { field: 'text' } },
          },
        ],
      },
  });
}

function errorCharts(d: ReportData): Chart[] {
  const title1 = 'Errors on held-out frames against the round';
  const title2 = 'Errors on held-out frames against training frames';
  const caption = 'Energy (meV/atom) and force (meV/Å) MAE and RMSE of each round\'s committee, overall and per element; horizontal rules are the campaign\'s warn (dotted) and fail (dashed) limits.';
  if (!d.errors.length) return [none('errors_round', title1, caption, 'no validate stage has been judged yet'), none('errors_frames', title2, caption, 'no validate stage has been judged yet')];
  const make = (id: string, title: string, x: 'round' | 'train_frames'): Chart => {
    const rows = d.errors.filter((e) => e[x] !== null).map((e) => ({ ...e, series: `${e.element} ${e.metric}` }));
    if (!rows.length) return none(id, title, caption, 'the label verdicts record no training-set size');
    const limits = d.error_limits.flatMap((l) => [
      ...(l.warn !== null ? [{ quantity: l.quantity, value: l.warn, kind: `${l.metric} warn` }] : []),
      ...(l.fail !== null ? [{ quantity: l.quantity, value: l.fail, kind: `${l.metric} fail` }] : []),
    ]);
    const panel = (quantity: 'energy' | 'force') => ({
      width: 250,
      height: 200,
      title: quantity === 'energy' ? 'energy (meV/atom)' : 'force (meV/Å)',
      layer: [
        {
          data: { values: rows.filter((r) => r.quantity === quantity) },
          mark: { type: 'line', point: true },
          encoding: {
            x: { field: x, type: 'quantitative', title: x === 'round' ? 'round' : 'training frames', axis: { tickMinStep: 1 } },
            y: { field: 'value', type: 'quantitative', title: quantity === 'energy' ? 'meV/atom' : 'meV/Å' },
            color: { field: 'element', type: 'nominal' },
            strokeDash: { field: 'metric', type: 'nominal' },
            detail: { field: 'series' },
          },
        },
        ...(limits.some((l) => l.quantity === quantity)
          ? [
              {
                data: { values: limits.filter((l) => l.quantity === quantity) },
                mark: { type: 'rule', color: '#888' },
                encoding: {
                  y: { field: 'value', type: 'quantitative' },
                  strokeDash: { field: 'kind', type: 'nominal', title: 'limit' },
                },
              },
            ]
          : []),
      ],
    });
    return {
      id,
      title,
      caption,
      spec: vegaLite({ hconcat: [panel('energy'), panel('force')], resolve: { scale: { strokeDash: 'independent' } } }),
    };
  };
  return [make('errors_round', title1, 'round'), make('errors_frames', title2, 'train_frames')];
}

function parityCharts(d: ReportData): Chart[] {
  const p = d.parity;
  const where = p.round === null ? '' : ` (round ${p.round}: ${p.predicted} against ${p.reference})`;
  const out: Chart[] = [];
  const diag = (lo: number, hi: number) => ({
    data: { values: [{ x: lo, y: lo }, { x: hi, y: hi }] },
    mark: { type: 'line', color: '#888', strokeDash: [4, 3] },
    encoding: { x: { field: 'x', type: 'quantitative' }, y: { field: 'y', type: 'quantitative' } },
  });
  const range = (vals: number[]): [number, number] => {
    let lo = Infinity;
    let hi = -Infinity;
    for (const v of vals) {
      if (v < lo) lo = v;
      if (v > hi) hi = v;
    }
    return [lo, hi];
  };
  /** One parity plot: points of `values` (x reference, y predicted) over the dashed equality line. */
  const parity = (id: string, title: string, caption: string, values: object[], x: string, y: string, what: string, mark: object, color?: string): Chart => {
    const [lo, hi] = range(values.flatMap((v) => [(v as Record<string, number>)[x], (v as Record<string, number>)[y]]));
    return chart(id, title, caption, {
        width: 320,
        height: 320,
        layer: [
          diag(lo, hi),
          {
            data: { values },
            mark,
            encoding: {
              x: { field: x, type: 'quantitative', title: `reference ${what}`, scale: { zero: false } },
              y: { field: y, type: 'quantitative', title: `predicted ${what}`, scale: { zero: false } },
              ...(color ? { color: { field: color, type: 'nominal' } } : {}),
            },
          },
        ],
    });
  };
  const fc = `Predicted against reference force components of the latest committee on its held-out frames${where}; the dashed line is equality.`;
  if (!p.forces.length) out.push(none('parity_forces', 'Force parity', fc, p.note ?? 'no held-out predictions yet'));
  else out.push(parity('parity_forces', 'Force parity', fc, p.forces, 'reference', 'predicted', 'force (eV/Å)', { type: 'point', filled: true, size: 12, opacity: 0.6 }, 'element'));
  const ec = `Predicted against reference energy per atom of the latest committee on its held-out frames${where}; the dashed line is equality.`;
  if (!p.energies.length) out.push(none('parity_energy', 'Energy parity', ec, p.note ?? 'no held-out predictions with energies yet'));
  else out.push(parity('parity_energy', 'Energy parity', ec, p.energies, 'reference_eV_per_atom', 'predicted_eV_per_atom', 'energy (eV/atom)', { type: 'point', filled: true, size: 30 }));
  return out;
}

function driftChart(d: ReportData): Chart {
  const id = 'drift';
  const title = 'Total energy of the constant-energy validation runs';
  const caption = 'Total energy per atom relative to each run\'s first frame; the legend gives each run\'s drift slope and the campaign\'s limit.';
  const rows = d.drift.flatMap((r) => r.points.map((p) => ({ ...p, run: r.label })));
  if (!rows.length) return none(id, title, caption, 'no constant-energy validation run recorded yet');
  return chart(id, title, caption, {
      width: W,
      height: H,
      data: { values: rows },
      mark: { type: 'line', point: rows.length < 400 },
      encoding: {
        x: { field: 'time_ps', type: 'quantitative', title: 'time (ps)' },
        y: { field: 'energy_meV_per_atom', type: 'quantitative', title: 'E - E(0) (meV/atom)' },
        color: { field: 'run', type: 'nominal', legend: { labelLimit: 600, orient: 'bottom', columns: 1 } },
      },
  });
}

function countsChart(d: ReportData): Chart {
  const id = 'counts';
  const title = 'Frames labeled, rejected and held out per round';
  const caption = 'Per round: frames accepted by the label gate, frames it rejected, and the new frames held out for testing.';
  const rows = d.counts.flatMap((c) => [
    { round: c.round, kind: 'labeled', frames: c.labeled },
    { round: c.round, kind: 'rejected', frames: c.rejected },
    { round: c.round, kind: 'held out', frames: c.held_out },
  ]);
  if (!rows.length) return none(id, title, caption, 'no label stage has been judged yet');
  return chart(id, title, caption, {
      width: W,
      height: H,
      data: { values: rows },
      mark: 'bar',
      encoding: {
        x: { field: 'round', type: 'ordinal' },
        xOffset: { field: 'kind' },
        y: { field: 'frames', type: 'quantitative' },
        color: { field: 'kind', type: 'nominal', title: '' },
      },
  });
}

function coreHourCharts(d: ReportData): Chart[] {
  const caption1 =
    'Core-hours used per round, by stage (exit records: end - start times cores)' +
    (d.budget.core_hours_per_round !== undefined ? `; the dashed rule is the per-round budget of ${d.budget.core_hours_per_round} core-hours.` : '; no per-round budget is set.');
  const caption2 =
    'Core-hours used so far, summed over rounds' +
    (d.budget.core_hours !== undefined ? `; the dashed rule is the campaign budget of ${d.budget.core_hours} core-hours.` : '; no campaign budget is set.');
  if (!d.core_hours.length) {
    return [none('core_hours', 'Core-hours per stage and round', caption1, 'no task has ended yet'), none('core_hours_total', 'Core-hours against the budget', caption2, 'no task has ended yet')];
  }
  const perRound = new Map<number, number>();
  for (const c of d.core_hours) perRound.set(c.round, (perRound.get(c.round) ?? 0) + c.hours);
  let sum = 0;
  const cumulative = [...perRound.entries()].sort((a, b) => a[0] - b[0]).map(([round, h]) => ({ round, used: (sum += h) }));
  return [
    {
      id: 'core_hours',
      title: 'Core-hours per stage and round',
      caption: caption1,
      spec: vegaLite({
        width: W,
        height: H,
        layer: [
          {
            data: { values: d.core_hours },
            mark: 'bar',
            encoding: {
              x: { field: 'round', type: 'ordinal' },
              y: { field: 'hours', type: 'quantitative', aggregate: 'sum', title: 'core-hours' },
              color: { field: 'stage', type: 'nominal', scale: { domain: ['sample', 'label', 'train', 'validate', 'simulate'] } },
            },
          },
          ...(d.budget.core_hours_per_round !== undefined
            ? [{ data: { values: [{ b: d.budget.core_hours_per_round }] }, mark: { type: 'rule', strokeDash: [6, 4], color: 'black' }, encoding: { y: { field: 'b', type: 'quantitative' } } }]
            : []),
        ],
      }),
    },
    {
      id: 'core_hours_total',
      title: 'Core-hours against the budget',
      caption: caption2,
      spec: vegaLite({
        width: W,
        height: 180,
        layer: [
          {
            data: { values: cumulative },
            mark: { type: 'line', point: true },
            encoding: { x: { field: 'round', type: 'quantitative', axis: { tickMinStep: 1, format: 'd' } }, y: { field: 'used', type: 'quantitative', title: 'core-hours used' } },
          },
          ...(d.budget.core_hours !== undefined
            ? [{ data: { values: [{ b: d.budget.core_hours }] }, mark: { type: 'rule', strokeDash: [6, 4], color: 'black' }, encoding: { y: { field: 'b', type: 'quantitative' } } }]
            : []),
        ],
      }),
    },
  ];
}

function lineageChart(d: ReportData): Chart {
  const id = 'lineage';
  const title = `Lineage of the latest committee${d.lineage.round !== null ? ` (round ${d.lineage.round})` : ''}`;
  const caption =
    'Every artifact the committee\'s models were made from, back to the starting structures: the models on the left, each column one step further upstream; an edge joins an input to what was made from it.' +
    (d.lineage.truncated ? ` Only the ${d.lineage.nodes.length} artifacts nearest the committee are drawn.` : '');
  if (!d.lineage.nodes.length) return none(id, title, caption, 'no model has been registered yet');
  const pos = new Map(d.lineage.nodes.map((n) => [n.id, n]));
  const edges = d.lineage.edges.map((e) => ({ x: pos.get(e.from)!.layer, y: pos.get(e.from)!.row, x2: pos.get(e.to)!.layer, y2: pos.get(e.to)!.row }));
  const rows = Math.max(...d.lineage.nodes.map((n) => n.row)) + 1;
  const layers = Math.max(...d.lineage.nodes.map((n) => n.layer)) + 1;
  const nodes = d.lineage.nodes.map((n) => ({ ...n, label: n.path.split('/').slice(-3).join('/') }));
  const x = { field: 'x', type: 'quantitative', axis: null, scale: { domain: [-0.5, layers - 0.3] } };
  const y = { field: 'y', type: 'quantitative', axis: null, scale: { domain: [-0.5, rows - 0.5], reverse: true } };
  return chart(id, title, caption, {
      width: Math.max(W, 170 * layers),
      height: Math.max(120, 26 * rows),
      layer: [
        { data: { values: edges }, mark: { type: 'rule', color: '#999' }, encoding: { x, y, x2: { field: 'x2' }, y2: { field: 'y2' } } },
        {
          data: { values: nodes.map((n) => ({ ...n, x: n.layer, y: n.row })) },
          layer: [
            { mark: { type: 'point', filled: true, size: 80 }, encoding: { x, y, color: { field: 'role', type: 'nominal' }, tooltip: [{ field: 'path' }, { field: 'id' }] } },
            { mark: { type: 'text', align: 'left', dx: 7, fontSize: 9 }, encoding: { x, y, text: { field: 'label' } } },
          ],
        },
      ],
  });
}

/** Render one chart to an SVG string (headless: Vega's own SVG renderer, no canvas, no network). */
export async function renderSvg(spec: TopLevelSpec): Promise<string> {
  const compiled = compile(spec).spec;
  const view = new vega.View(vega.parse(compiled), { renderer: 'none', logLevel: vega.Error });
  try {
    return await view.toSVG();
  } finally {
    view.finalize();
  }
}
