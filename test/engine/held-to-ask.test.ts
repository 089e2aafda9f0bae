/**
 * Trajectories held to what their task asked (invented stage programs, see fake-stage.mjs): a simulate run that
 * writes only its first frame, a constant-energy run of one frame, a run whose velocities are 30 % cold and a run
 * that drops one committee member's forces from a frame are each caught, with the task, the condition and the
 * misbehaviour named; the same campaign with well-behaved programs converges; a pressure condition's constant-energy
 * run starts in round 0 from the start structure with `pressure` in its params and from round 1 on from the last
 * frame of the previous round's simulate trajectory (start.xyz, registered as made from that trajectory).
 *
 * The fixture's constant-energy runs are lengthened to 1000 steps of 1 fs (1001 frames over 1 ps), enough for the
 * drift gate's sample limits, so that only the misbehaviour under test fails.
 */
import { existsSync, readFileSync, writeFileSync } from 'node:fs';
import { join } from 'node:path';
import { afterAll, describe, expect, it } from 'vitest';
import { readFrames } from '../../src/atoms/xyz/reader.js';
import { formatFrame } from '../../src/atoms/xyz/writer.js';
import { runCampaign } from '../../src/engine/run.js';
import { BufferOutput } from '../../src/engine/output.js';
import { ledgerEvents, makeCampaign, removeCampaigns } from './fixture.js';

afterAll(removeCampaigns);

async function campaign(flags: string[], edit: (yaml: string) => string = (y) => y) {
  const { dir, file } = makeCampaign({ maxRounds: 2 });
  writeFileSync(file, edit(readFileSync(file, 'utf8').replace('nve_steps: 5', 'nve_steps: 1000')));
  for (const f of flags) writeFileSync(join(dir, f), '');
  const out = new BufferOutput();
  const r = await runCampaign({ campaign: file, out, error: (m) => out.line(`error: ${m}`) });
  const events = ledgerEvents(dir);
  const gated = (round: number, stage: string): Record<string, any> => {
    const g = events.filter((e) => e.type === 'stage_gated' && e.round === round && e.stage === stage).at(-1);
    if (!g) throw new Error(`no verdict for r${round}/${stage}:\n${out.text}`);
    return g;
  };
  return { dir, out: out.text, exitCode: r.exitCode, events, gated };
}

describe('trajectories held to what was asked', () => {
  it('well-behaved programs: the campaign converges, with each condition’s mean temperature in the figures and summary', async () => {
    const c = await campaign([]);
    expect(c.out).toContain('campaign converged in round 1');
    const sim = c.gated(0, 'simulate');
    expect(sim.verdict).toBe('pass');
    expect(sim.figures.conditions.cold.mean_temperature_K).toBeCloseTo(30, 2);
    expect(sim.figures.conditions.warm.mean_temperature_K).toBeCloseTo(90, 2);
    expect(c.out).toMatch(/cold: 10 frames, .*mean 30 K; warm: 10 frames, .*mean 90 K/);
    const traj = sim.gates.filter((g: any) => g.gate === 'trajectory');
    expect(traj.map((g: any) => [g.task, g.verdict, g.figures.frames, g.figures.expected_frames])).toEqual([
      ['r0/simulate/cold', 'pass', 10, 11],
      ['r0/simulate/warm', 'pass', 10, 11],
    ]);
    const val = c.gated(0, 'validate').gates.filter((g: any) => g.gate === 'trajectory');
    expect(val.map((g: any) => [g.task, g.verdict, g.figures.frames, g.figures.span_fs])).toEqual([
      ['r0/validate/nve-cold', 'pass', 1001, 1000],
      ['r0/validate/nve-warm', 'pass', 1001, 1000],
    ]);
  }, 240_000);

  it('a simulate program that writes only its first frame fails the stage and does not converge', async () => {
    const c = await campaign(['short-simulate-warm']);
    expect(c.out).not.toContain('converged');
    expect(c.exitCode).not.toBe(0);
    const sim = c.gated(0, 'simulate');
    expect(sim.verdict).toBe('fail');
    expect(sim.reasons.join('\n')).toContain(
      'r0/simulate/warm: trajectory fail: condition warm: trajectory ends after 1 of 11 expected frames (1 of 10 fs): the run stopped before the 10 steps asked (a frame every 1 steps of 1 fs)',
    );
    expect(sim.reasons.join('\n')).not.toMatch(/simulate\/cold: trajectory/);
  }, 240_000);

  it('a one-frame constant-energy run fails validation, named as an early stop', async () => {
    const c = await campaign(['short-validate-nve-cold']);
    expect(c.out).not.toContain('converged');
    const val = c.gated(0, 'validate');
    expect(val.verdict).toBe('fail');
    expect(val.reasons.join('\n')).toContain(
      'r0/validate/nve-cold: trajectory fail: condition cold, constant-energy run: trajectory ends after 1 of 1001 expected frames (0 of 1000 fs)',
    );
  }, 240_000);

  it('velocities 30 % cold fail the simulate stage, naming the temperature found and asked', async () => {
    const c = await campaign(['cold-simulate-warm']);
    const sim = c.gated(0, 'simulate');
    expect(sim.verdict).toBe('fail');
    expect(sim.reasons.join('\n')).toMatch(/r0\/simulate\/warm: trajectory fail: condition warm: mean temperature 63 K over frames 2-9 \(from velocities \(9 degrees of freedom\)\) is 30 % below the 90 K asked/);
    expect(sim.figures.conditions.warm.mean_temperature_K).toBeCloseTo(63, 2);
  }, 240_000);

  it('a frame without forces_1 fails the committee gate, naming the frame and the array', async () => {
    const c = await campaign(['dropforce-simulate-cold']);
    const sim = c.gated(0, 'simulate');
    expect(sim.verdict).toBe('fail');
    expect(sim.reasons.join('\n')).toMatch(/r0\/simulate\/cold: committee fail: .*frame 3 of \S+\/rounds\/r0\/simulate\/cold\/trajectory\.xyz.*forces_1/);
  }, 240_000);

  it('a pressure condition: mean pressure reported; its constant-energy run starts from the cell the condition reached', async () => {
    const c = await campaign([], (y) => y.replace('temperature: 90\n    steps: 10', 'temperature: 90\n    pressure: 2000\n    steps: 10'));
    expect(c.out).toContain('campaign converged in round 1');
    const sim = c.gated(0, 'simulate');
    expect(sim.figures.conditions.warm.mean_pressure_bar).toBeCloseTo(2000, 0);
    expect(sim.figures.conditions.cold.mean_pressure_bar).toBeUndefined();
    expect(c.out).toMatch(/warm: .*mean 90 K, mean 2000 bar/);
    // round 0: from the start structure, with the pressure for the program to reach
    const t0 = JSON.parse(readFileSync(join(c.dir, 'rounds/r0/validate/nve-warm/task.json'), 'utf8'));
    expect(t0.params.pressure).toBe(2000);
    expect(t0.inputs.start).toBe(join(c.dir, 'start.xyz'));
    const cold0 = JSON.parse(readFileSync(join(c.dir, 'rounds/r0/validate/nve-cold/task.json'), 'utf8'));
    expect(cold0.params.pressure).toBeUndefined();
    // round 1: the last frame of r0/simulate/warm, registered as made from that trajectory
    const t1 = JSON.parse(readFileSync(join(c.dir, 'rounds/r1/validate/nve-warm/task.json'), 'utf8'));
    const start = join(c.dir, 'rounds/r1/validate/nve-warm/start.xyz');
    expect(t1.inputs.start).toBe(start);
    expect(t1.params.pressure).toBeUndefined();
    const raw = [];
    for await (const f of readFrames(join(c.dir, 'rounds/r0/simulate/warm/trajectory.xyz'))) raw.push(f);
    expect(readFileSync(start, 'utf8')).toBe(formatFrame(raw.at(-1)!));
    const arts = c.events.filter((e) => e.type === 'artifact');
    const traj = arts.find((e) => e.path === 'rounds/r0/simulate/warm/trajectory.xyz');
    expect(arts.find((e) => e.path === 'rounds/r1/validate/nve-warm/start.xyz')).toMatchObject({ role: 'nve_start', inputs: [traj!.id] });
    expect(existsSync(join(c.dir, 'rounds/r1/validate/nve-cold/start.xyz'))).toBe(false);
  }, 240_000);
});
