import { mkdtempSync, rmSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { ManualClock } from '../agent/clock.js';
import { validateConfig } from '../agent/config/load.js';
import type { LiveFrame } from '../agent/dsp/types.js';
import { LiveServer } from '../agent/live/server.js';
import { MemoryLogger } from '../agent/log.js';
import { measure, twoBearingRig, type RigMass } from './balance-rig.js';
import { angleDiff } from './sim-fixtures.js';

/**
 * The workbench's static-couple and trim jobs through the HTTP API, on the geometric rotor of
 * test/balance-rig.ts (written from the geometry, not from the solver's algebra): the rotor's own
 * unbalance is known, so the right correction is that unbalance turned 180 degrees, whatever the
 * solver does inside. The job runs in the with-rotation convention to carry the angles both ways.
 */

const OPERATOR = 'operator-token-fedcba9876543210';
const rig = twoBearingRig('ccw');
const PLANES = ['P1', 'P2'];
/** The rotor as found, against rotation (invented). */
const UNBALANCE: RigMass[] = [
  { plane: 0, mass_g: 40, angle_deg: 70, convention: 'against_rotation' },
  { plane: 1, mass_g: 25, angle_deg: 200, convention: 'against_rotation' },
];

describe('static-couple and trim jobs on a geometric rotor', () => {
  let dir: string;
  let server: LiveServer;
  let base: string;
  let t = Date.UTC(2026, 3, 1);
  let rotor: RigMass[] = [...UNBALANCE];
  let reloads = 0;

  const post = async (path: string, body: unknown) => {
    const res = await fetch(base + path, {
      method: 'POST',
      headers: { Authorization: `Bearer ${OPERATOR}`, 'Content-Type': 'application/json' },
      body: JSON.stringify(body),
    });
    return { status: res.status, body: (await res.json()) as any };
  };
  const frame = (): LiveFrame => {
    const r = measure(rig, rotor);
    return {
      sample_index: 0,
      speed_rpm: 1500,
      revolutions_weight: 32,
      age_s: 0.02,
      channels: Object.entries(r).map(([id, v]) => ({
        id,
        orders: {
          '1': {
            order: 1,
            freq_hz: 25,
            amp_pk_mm_s: v.amp,
            amp_rms_mm_s: v.amp / Math.SQRT2,
            phase_deg: v.phase_deg,
          },
        },
      })),
    };
  };
  /** Captures the declared run: frames from the rotor as it now is, until the run is recorded. */
  const capture = async (id: string) => {
    expect((await post(`/api/jobs/${id}/capture`, {})).status).toBe(200);
    for (let i = 0; i < 200 && server.workbench.view()?.capture; i++)
      server.onLive(frame(), (t += 500));
    for (let i = 0; i < 200; i++) {
      const v = server.workbench.view()!;
      if (v.job.runs.at(-1)!.capture) return v;
      await new Promise((r) => setTimeout(r, 5));
    }
    throw new Error('capture not recorded');
  };
  /** Fits what a declared run lists on the rig (with-rotation angles). */
  const fit = (
    changes: Array<{
      action: string;
      weight: { id: string; plane: string; mass_g: number; angle_deg: number };
    }>,
  ) => {
    for (const c of changes) {
      if (c.action === 'remove')
        rotor = rotor.filter((m) => (m as RigMass & { id?: string }).id !== c.weight.id);
      else
        rotor.push({
          id: c.weight.id,
          plane: PLANES.indexOf(c.weight.plane),
          mass_g: c.weight.mass_g,
          angle_deg: c.weight.angle_deg,
          convention: 'with_rotation',
        } as RigMass);
    }
  };

  beforeAll(async () => {
    dir = mkdtempSync(join(tmpdir(), 'tw-live-wb-'));
    const cfg = validateConfig({
      machine: { id: 'rig-fan', group: 2, support: 'rigid', rated_rpm: 1500 },
      tach: { channel: 2, trigger_v: 2.5 },
      sensors: [
        { id: 'DE-V', channel: 0, bearing: 'DE', direction: 'vertical', sensitivity_mv_per_g: 100 },
        {
          id: 'NDE-V',
          channel: 1,
          bearing: 'NDE',
          direction: 'vertical',
          sensitivity_mv_per_g: 100,
        },
      ],
      state_dir: dir,
      balance: {
        angle_convention: 'with_rotation',
        rotor_mass_kg: 300,
        planes: { P1: { radius_mm: 400 }, P2: { radius_mm: 400 } },
      },
      live: {
        port: 0,
        tokens: [{ name: 'crew', role: 'operator', env: 'TW_OP' }],
        capture: { revolutions: 60, settle_revolutions: 20 },
      },
    });
    server = LiveServer.fromConfig(
      cfg,
      {
        logger: new MemoryLogger(),
        clock: new ManualClock(),
        emit: () => undefined,
        onCoefficientsSaved: () => void reloads++,
      },
      { TW_OP: OPERATOR },
    );
    base = `http://127.0.0.1:${(await server.start()).port}`;
  });

  afterAll(async () => {
    await server.stop();
    rmSync(dir, { recursive: true, force: true });
  });

  it('solves a static-couple job from a static pair and a couple pair', async () => {
    const created = await post('/api/jobs', { kind: 'static_couple', by: 'A. Ruiz (invented)' });
    expect(created.status).toBe(200);
    const id = created.body.view.job.job_id;
    expect(created.body.view.job.setup.angle_convention).toBe('with_rotation');
    expect(created.body.view.job.setup.planes.map((p: { name: string }) => p.name)).toEqual(PLANES);
    await capture(id);
    // Trial 1, a static pair: 30 g in both planes at 0 deg.
    let r = await post(`/api/jobs/${id}/runs`, {
      purpose: 'trial',
      add: PLANES.map((plane) => ({ plane, mass_g: 30, angle_deg: 0 })),
      acknowledge_cautions: true,
    });
    expect(r.status).toBe(200);
    fit(r.body.view.job.runs[1].changes);
    await capture(id);
    // Trial 2, a couple pair: 30 g at 90 deg in P1 and 270 deg in P2, the static pair taken off.
    r = await post(`/api/jobs/${id}/runs`, {
      purpose: 'trial',
      remove: 'all_trials',
      add: [
        { plane: 'P1', mass_g: 30, angle_deg: 90 },
        { plane: 'P2', mass_g: 30, angle_deg: 270 },
      ],
      acknowledge_cautions: true,
    });
    expect(
      r.body.view.job.runs[2].changes.map(
        (c: { action: string; weight: { id: string } }) => `${c.action} ${c.weight.id}`,
      ),
    ).toEqual(['remove T1', 'remove T2', 'fit T3', 'fit T4']);
    fit(r.body.view.job.runs[2].changes);
    const v = await capture(id);
    expect(v.job.runs[2].trial_check!.some((c) => c.moved_enough)).toBe(true);
    const solved = await post(`/api/jobs/${id}/solve`, {});
    const res = solved.body.view.job.solution.result;
    expect(res.ok).toBe(true);
    // The correction is the rotor's own unbalance turned 180 deg, in the with-rotation convention:
    // P1 40 g at 70 + 180 = 250 deg against = 110 deg with; P2 25 g at 20 deg against = 340 deg
    // with.
    expect(res.corrections[0].mass_g).toBeCloseTo(40, 6);
    expect(angleDiff(res.corrections[0].angle_deg, 110)).toBeCloseTo(0, 5);
    expect(res.corrections[1].mass_g).toBeCloseTo(25, 6);
    expect(angleDiff(res.corrections[1].angle_deg, 340)).toBeCloseTo(0, 5);
    // The same as static and couple pairs: half the vector sum, and half the difference (by hand).
    const D2R = Math.PI / 180;
    const sx = (40 * Math.cos(110 * D2R) + 25 * Math.cos(340 * D2R)) / 2;
    const sy = (40 * Math.sin(110 * D2R) + 25 * Math.sin(340 * D2R)) / 2;
    expect(res.static_couple.static_pair.mass_g_each).toBeCloseTo(Math.hypot(sx, sy), 6);
    // Fit it with the trial weights off; the check run is then balanced.
    const check = await post(`/api/jobs/${id}/runs`, {
      purpose: 'check',
      remove: solved.body.view.proposals[0].remove,
      add: solved.body.view.proposals[0].add,
      acknowledge_cautions: true,
    });
    fit(check.body.view.job.runs[3].changes);
    const done = await capture(id);
    for (const s of done.job.runs[3].residual!.sensors)
      expect(s.pct_of_as_found).toBeLessThan(1e-6);
    expect((await post(`/api/jobs/${id}/finish`, {})).body.view.job.coefficients.saved).toBe(true);
    expect(reloads).toBe(1);
  });

  it('trims from the stored coefficients without trial runs after the rotor picks up build-up', async () => {
    // 12 g of build-up in P2 at 150 deg against rotation, on top of the balanced rotor.
    rotor.push({ plane: 1, mass_g: 12, angle_deg: 150, convention: 'against_rotation' });
    const created = await post('/api/jobs', { kind: 'trim', by: 'A. Ruiz (invented)' });
    expect(created.status).toBe(200);
    const id = created.body.view.job.job_id;
    expect(created.body.view.job.setup.coefficients_from.speed_rpm).toBeCloseTo(1500, 6);
    expect(
      (
        await post(`/api/jobs/${id}/runs`, {
          purpose: 'trial',
          add: [{ plane: 'P1', mass_g: 5, angle_deg: 0 }],
          acknowledge_cautions: true,
        })
      ).status,
    ).toBe(409);
    await capture(id);
    const solved = await post(`/api/jobs/${id}/solve`, {});
    const res = solved.body.view.job.solution.result;
    expect(res.method).toBe('given_coefficients');
    // Cancel the build-up: 12 g at 150 + 180 = 330 deg against = 30 deg with rotation in P2,
    // nothing in P1.
    expect(res.corrections[0].mass_g).toBeLessThan(1e-6);
    expect(res.corrections[1].mass_g).toBeCloseTo(12, 6);
    expect(angleDiff(res.corrections[1].angle_deg, 30)).toBeCloseTo(0, 5);
    const fin = await post(`/api/jobs/${id}/finish`, {});
    expect(fin.body.view.job.coefficients).toEqual({
      saved: false,
      reason: 'the job used given coefficients and measured none of its own',
    });
  });
});
