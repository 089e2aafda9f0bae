/**
 * The readable text of a gate result (what `ratchet check <gate>` prints without --json).
 */
import { renderPairs, renderTable } from '../report/table.js';
import type { CommitteeFigures } from './committee.js';
import type { ContactsFigures } from './contacts.js';
import type { DriftFigures } from './drift.js';
import type { ErrorsFigures } from './errors.js';
import { frameLabel } from './frames.js';
import type { FileSpan, GateResult } from './types.js';
import { fmt } from './verdict.js';

/** Rows of a per-frame table shown in full up to this many; longer inputs are summarised (the JSON has everything). */
export const MAX_ROWS = 20;

const n = (x: number | null | undefined, digits = 4): string => (x === null || x === undefined ? 'n/a' : fmt(x, digits));
const fixed = (x: number, d: number): string => (Number.isFinite(x) ? x.toFixed(d) : String(x));
/** "(warn above 5, fail above 10)" for a limit of limits.ts; unchecked parts left out. */
const limitText = (l: { warn: number | null; fail: number | null }, tail = ''): string => {
  const parts = [l.warn !== null ? `warn above ${fmt(l.warn)}` : '', l.fail !== null ? `fail above ${fmt(l.fail)}` : ''].filter(Boolean);
  return parts.length ? ` (${parts.join(', ')}${tail})` : ' (not checked)';
};

function header(r: GateResult<unknown>): string {
  return `${r.gate}: ${r.verdict.toUpperCase()}\n`;
}

function reasons(r: GateResult<unknown>): string {
  if (r.reasons.length === 0) return '';
  return 'reasons:\n' + r.reasons.map((x) => `  - ${x}\n`).join('');
}

function filesLine(files: FileSpan[]): string {
  if (files.length <= 1) return files[0]?.path ?? '';
  return files.map((f) => `${f.path} (${f.frames} from frame ${f.first_frame})`).join(', ');
}

export function formatContacts(r: GateResult<ContactsFigures>): string {
  const f = r.figures;
  let out = header(r);
  const m = f.min_distance;
  out += renderPairs([
    ['input', filesLine(f.files)],
    ['frames', `${f.frames}${f.atoms !== null ? ` (${f.atoms} atoms in the first)` : ''}`],
    ['closest pair', m ? `${fixed(m.value, 4)} Å, atoms ${m.i} and ${m.j} (${m.species.join('-')}), ${frameLabel(m.frame, f.files)}` : 'none'],
    ['limit', `${fmt(f.scale)} x sum of covalent radii (Cordero et al. 2008), ${fmt(Math.max(f.scale, f.hydrogen_scale))} x for pairs with H, unless given per pair`],
    ['violations', `${f.violation_count}${f.violation_count ? ` in ${f.violation_frames} frame(s), first in ${frameLabel(f.first_violation_frame!, f.files)}` : ''}`],
    ...(f.worst_violation
      ? [['most severe', `${fixed(f.worst_violation.distance, 4)} Å, atoms ${f.worst_violation.i} and ${f.worst_violation.j} (${f.worst_violation.species.join('-')}), ${frameLabel(f.worst_violation.frame, f.files)}, limit ${fixed(f.worst_violation.limit, 4)} Å`] as [string, string]]
      : []),
  ]);
  const keys = Object.keys(f.pair_min).sort();
  if (keys.length) {
    out += '\n';
    out += renderTable(
      [['pair', 'closest (Å)', 'limit (Å)', 'frame'], ...keys.map((k) => [k, fixed(f.pair_min[k], 4), f.limits[k] !== undefined ? fixed(f.limits[k], 4) : 'n/a', String(f.pair_min_at[k].frame)])],
      { indent: '  ' },
    );
  }
  if (f.violations.length) {
    const shown = f.violations.slice(0, MAX_ROWS);
    out += '\n';
    out += renderTable(
      [['frame', 'i', 'j', 'pair', 'distance (Å)', 'limit (Å)'], ...shown.map((v) => [String(v.frame), String(v.i), String(v.j), v.species.join('-'), fixed(v.distance, 4), fixed(v.limit, 4)])],
      { indent: '  ' },
    );
    if (f.violation_count > shown.length) out += `  ... ${f.violation_count - shown.length} more (--json lists up to the cap)\n`;
  }
  return out + reasons(r);
}

export function formatDrift(r: GateResult<DriftFigures>): string {
  const f = r.figures;
  const t = f.limits;
  return (
    header(r) +
    renderPairs([
      ['input', filesLine(f.files)],
      ['frames', `${f.frames}${f.first_bad_frame !== null ? ` (figures over the first ${f.frames_used}; ${frameLabel(f.first_bad_frame, f.files)} is bad)` : ''} (at least ${f.sample_limits.min_frames} over ${fmt(f.sample_limits.min_span_ps)} ps needed)`],
      ['atoms', String(f.atoms)],
      ['energy from', f.energy_source ?? 'n/a'],
      ['time from', f.time_source ?? 'n/a'],
      ['duration', `${n(f.duration_ps)} ps`],
      ['slope', `${n(f.slope_meV_per_atom_per_ps)} ± ${n(f.slope_se_meV_per_atom_per_ps, 2)} meV/atom/ps${limitText(t.max_drift, ' in magnitude; warn only beyond 2 standard errors')}`],
      ['std', `${n(f.std_meV_per_atom)} meV/atom`],
      ['max |E(t)-E(0)|', `${n(f.max_excursion_meV_per_atom)} meV/atom${limitText(t.max_excursion)}`],
      [
        'mean temperature',
        f.mean_temperature_K === null ? 'n/a' : `${fmt(f.mean_temperature_K, 5)} K${f.dof !== null ? ` (${f.dof} degrees of freedom: ${f.dof_rule}; velocities from '${f.velocities_source}')` : ''}`,
      ],
    ]) +
    reasons(r)
  );
}

export function formatErrors(r: GateResult<ErrorsFigures>): string {
  const f = r.figures;
  const mx = f.max_force_error;
  const me = f.max_energy_error;
  let out =
    header(r) +
    renderPairs([
      ['reference', f.files.reference],
      ['predicted', f.files.predicted],
      ['frames', `${f.frames}${f.judged_frames !== f.frames ? ` (${f.judged_frames} judged)` : ''}, ${f.atoms} atoms, ${f.force_components} force components`],
      ['energy MAE', `${n(f.energy_mae_meV_per_atom)} meV/atom${limitText(f.limits.energy_mae)}`],
      ['energy RMSE', `${n(f.energy_rmse_meV_per_atom)} meV/atom${limitText(f.limits.energy_rmse)}`],
      ['largest energy error', me ? `${fmt(me.value_meV_per_atom)} meV/atom in frame ${me.frame}` : 'n/a'],
      ['force MAE', `${n(f.force_mae_meV_per_A)} meV/Å${limitText(f.limits.force_mae, ', overall and per element')}`],
      ['force RMSE', `${n(f.force_rmse_meV_per_A)} meV/Å${limitText(f.limits.force_rmse, ', overall and per element')}`],
      ['largest force error', mx ? `${fmt(mx.value_meV_per_A)} meV/Å, frame ${mx.frame}, atom ${mx.atom} (${mx.species}), ${mx.component}` : 'n/a'],
      ...(f.stress_frames
        ? ([
            ['stress MAE', `${n(f.stress_mae_GPa)} GPa (${f.stress_frames} frames, 6 Voigt components)`],
            ['stress RMSE', `${n(f.stress_rmse_GPa)} GPa${limitText(f.limits.stress_rmse)}`],
            ['pressure error', `MAE ${n(f.pressure_mae_GPa)} GPa, RMSE ${n(f.pressure_rmse_GPa)} GPa, mean ${n(f.pressure_mean_error_GPa)} GPa`],
          ] as [string, string][])
        : []),
    ]);
  const els = Object.keys(f.per_element);
  if (els.length) {
    out += '\n';
    out += renderTable(
      [
        ['element', 'force MAE (meV/Å)', 'force RMSE (meV/Å)', 'components'],
        ...els.map((e) => [e, fmt(f.per_element[e].force_mae_meV_per_A), fmt(f.per_element[e].force_rmse_meV_per_A), String(f.per_element[e].components)]),
      ],
      { indent: '  ' },
    );
  }
  return out + reasons(r);
}

export function formatCommittee(r: GateResult<CommitteeFigures>): string {
  const f = r.figures;
  const finite = f.max_spread.map((x, k) => [x, k] as const).filter(([x]) => x !== null) as [number, number][];
  const top = finite.reduce<[number, number] | null>((a, b) => (a === null || b[0] > a[0] ? b : a), null);
  let out =
    header(r) +
    renderPairs([
      ['input', filesLine(f.files)],
      ['frames', `${f.frames} (${f.models} models)`],
      ['window', `[${fmt(f.window.lower)}, ${fmt(f.window.upper)}) eV/Å`],
      ['bands', `confident ${f.bands.confident}, informative ${f.bands.informative}, runaway ${f.bands.runaway}`],
      ['largest spread', top ? `${fmt(top[0])} eV/Å in ${frameLabel(top[1], f.files)}` : 'n/a'],
      ['first runaway', f.first_runaway_frame === null ? 'none' : frameLabel(f.first_runaway_frame, f.files)],
      ...(f.incomplete_frames
        ? [['incomplete', `${f.incomplete_frames} frame(s), first ${frameLabel(f.first_incomplete_frame!, f.files)}: ${f.incomplete[0] ? [...f.incomplete[0].missing.map((x) => `${x} missing`), ...f.incomplete[0].extra.map((x) => `${x} unexpected`)].join(', ') : ''}`] as [string, string]]
        : []),
    ]);
  if (f.frames > 0 && f.frames <= MAX_ROWS) {
    out += '\n';
    out += renderTable(
      [
        ['frame', 'max spread (eV/Å)', 'mean spread (eV/Å)', 'atom', 'band'],
        ...f.band.map((b, k) => [String(k), n(f.max_spread[k]), n(f.mean_spread[k]), f.max_spread_atom[k] === null ? '-' : String(f.max_spread_atom[k]), b]),
      ],
      { indent: '  ' },
    );
  } else if (f.frames > MAX_ROWS) out += `  (per-frame spreads and bands: --json)\n`;
  return out + reasons(r);
}

/** The readable text of any gate's result. */
export function formatResult(r: GateResult<unknown>): string {
  switch (r.gate) {
    case 'contacts':
      return formatContacts(r as GateResult<ContactsFigures>);
    case 'drift':
      return formatDrift(r as GateResult<DriftFigures>);
    case 'errors':
      return formatErrors(r as GateResult<ErrorsFigures>);
    case 'committee':
      return formatCommittee(r as GateResult<CommitteeFigures>);
    default:
      return header(r) + reasons(r);
  }
}

/** The JSON object of `ratchet check --json`: gate, verdict, reasons and every figure at the top level. */
export function resultJson(r: GateResult<object>): Record<string, unknown> {
  return { gate: r.gate, verdict: r.verdict, reasons: r.reasons, ...r.figures };
}
