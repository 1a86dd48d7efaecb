import { describe, expect, it } from 'vitest';
import type { LiveFrame } from '../agent/dsp/types.js';
import { RunCapture, type CaptureSettings } from '../agent/balance/workbench/capture.js';

/**
 * Capturing a balancing run from live frames: settle, then average the live 1x vectors over N
 * revolutions at steady speed, restarting on speed changes. Frames are built here with known
 * vectors.
 */

const SETTINGS: CaptureSettings = {
  revolutions: 100,
  settleRevolutions: 50,
  speedTolerancePct: 1,
  maxRestarts: 2,
  maxAgeS: 2,
  scatterWarnPct: 10,
  scatterFloorMmS: 0.05,
};

function frame(
  speed: number | null,
  vectors: Record<string, [number, number]>,
  ageS = 0.02,
): LiveFrame {
  return {
    sample_index: 0,
    speed_rpm: speed,
    revolutions_weight: 32,
    age_s: ageS,
    channels: Object.entries(vectors).map(([id, [amp, phase]]) => ({
      id,
      orders: {
        '1': {
          order: 1,
          freq_hz: (speed ?? 0) / 60,
          amp_pk_mm_s: amp,
          amp_rms_mm_s: amp / Math.SQRT2,
          phase_deg: phase,
        },
      },
    })),
  };
}

/** Feeds frames every `stepMs` until the capture finishes or `max` frames were fed. */
function feed(
  cap: RunCapture,
  make: (i: number) => LiveFrame,
  stepMs = 500,
  max = 500,
  t0 = 1_000_000,
): number {
  let i = 0;
  for (; i < max && !cap.finished; i++) cap.push(make(i), t0 + i * stepMs);
  return i;
}

describe('capturing a balancing run from the live vectors', () => {
  it('skips the settling revolutions, then averages N revolutions as vectors', () => {
    const cap = new RunCapture(['A', 'B'], SETTINGS);
    // 1500 r/min, 0.5 s per frame: 12.5 revolutions per frame. The vector at A before settling is
    // far away (what the live average still held from before the weight change) and must not count.
    let before = 0;
    const frames = feed(cap, (i) => {
      const settling = i * 12.5 <= 50;
      if (settling) before++;
      // After settling, A alternates +-10 degrees around 40 degrees: the vector mean is at
      // 40 degrees with amplitude 5 cos(10 deg); B is steady.
      const a: [number, number] = settling ? [9, 200] : [5, 40 + (i % 2 ? 10 : -10)];
      return frame(1500, { A: a, B: [2, 300] });
    });
    const r = cap.result!;
    expect(r).not.toBeNull();
    expect(before).toBeGreaterThan(3);
    expect(frames).toBeLessThan(20);
    expect(r.revolutions).toBeGreaterThanOrEqual(100);
    expect(r.revolutions).toBeLessThan(100 + 12.5 + 1e-9);
    expect(r.speed_rpm).toBeCloseTo(1500, 6);
    // The mean of two unit vectors 20 degrees apart has length cos(10 deg) (plane geometry), equal
    // weights.
    expect(r.readings.A!.phase_deg).toBeCloseTo(40, 6);
    expect(r.readings.A!.amp_pk_mm_s).toBeCloseTo(5 * Math.cos((10 * Math.PI) / 180), 2);
    expect(r.readings.B!.amp_pk_mm_s).toBeCloseTo(2, 9);
    expect(r.readings.B!.phase_deg).toBeCloseTo(300, 9);
    expect(r.readings.B!.scatter_pct).toBeCloseTo(0, 9);
    // Scatter of A: every frame is 5 sin(10 deg) from the mean, i.e. tan(10 deg) = 17.6 % of it:
    // flagged.
    expect(r.readings.A!.scatter_pct).toBeCloseTo(100 * Math.tan((10 * Math.PI) / 180), 1);
    expect(r.notes.some((n) => n.includes('A was unsteady'))).toBe(true);
  });

  it('counts revolutions on the sample clock: a wall-clock step forward in the frame times does not end the averaging early', () => {
    const fs = 25_600;
    const at = (i: number) => ({
      ...frame(1500, { A: [5, 40] }),
      sample_index: (i + 1) * fs * 0.5,
      sample_rate_hz: fs,
    });
    const cap = new RunCapture(['A'], SETTINGS);
    // Frame times 0.5 s apart on the sample clock; at frame 6 the wall clock stepped 60 s forward
    // (the runtime re-anchored): 1500 revolutions by the wall clock, 12.5 by the samples.
    const t = (i: number) => 1_000_000 + i * 500 + (i >= 6 ? 60_000 : 0);
    let i = 0;
    for (; i < 40 && !cap.finished; i++) cap.push(at(i), t(i));
    const r = cap.result!;
    // Own computation: 50 settling + 100 averaged revolutions at 12.5 per frame need 12 frames
    // after the first.
    expect(i).toBe(13);
    expect(r.revolutions).toBeGreaterThanOrEqual(100);
    expect(r.revolutions).toBeLessThan(100 + 12.5 + 1e-9);
  });

  it('does not call a small vector unsteady for scatter below the floor', () => {
    // A residual of 0.02 mm/s pk that wanders +-20 degrees: 36 % of itself, but only 0.007 mm/s.
    const cap = new RunCapture(['A'], SETTINGS);
    feed(cap, (i) => frame(1500, { A: [0.02, 40 + (i % 2 ? 20 : -20)] }));
    expect(cap.result!.readings.A!.scatter_pct).toBeGreaterThan(30);
    expect(cap.result!.readings.A!.scatter_pk_mm_s).toBeLessThan(0.05);
    expect(cap.result!.notes).toEqual([]);
  });

  it('restarts the averaging when the speed moves beyond the tolerance, and says so', () => {
    const cap = new RunCapture(['A'], SETTINGS);
    // one frame 2 % fast, in the middle of the averaging
    feed(cap, (i) => frame(i === 8 ? 1530 : 1500, { A: [3, 10] }));
    const r = cap.result!;
    expect(r.restarts).toBe(1);
    expect(r.notes[0]).toMatch(/speed changed from 1500 to 1530 r\/min \(2\.0 %\).*restarted/);
    expect(r.speed_min_rpm).toBe(1500);
    expect(r.speed_max_rpm).toBe(1500);
  });

  it('gives up with a clear reason when the speed keeps changing', () => {
    const cap = new RunCapture(['A'], { ...SETTINGS, settleRevolutions: 0 });
    feed(cap, (i) => frame(1500 + (i % 3 === 2 ? 40 * i : 0), { A: [3, 10] }));
    expect(cap.result).toBeNull();
    expect(cap.failed).toMatch(/speed kept changing \(3 restarts.*hold the fan at a steady speed/);
    expect(cap.progress().phase).toBe('failed');
  });

  it('pauses while the tach delivers no revolutions and starts settling again after', () => {
    const cap = new RunCapture(['A'], SETTINGS);
    feed(
      cap,
      (i) => (i >= 5 ? frame(1500, { A: [3, 10] }, 7.5) : frame(1500, { A: [3, 10] })),
      500,
      8,
    );
    const p = cap.progress();
    expect(p.waiting).toMatch(/no trusted revolution for 7\.5 s: tach lost or fan stopped/);
    expect(p.settled_revolutions).toBe(0);
    feed(cap, () => frame(1500, { A: [3, 10] }), 500, 500, 2_000_000);
    expect(cap.result!.readings.A!.amp_pk_mm_s).toBeCloseTo(3, 9);
  });

  it('allows a slow fan three revolutions between trusted revolutions', () => {
    // 60 r/min: a revolution a second, so a last revolution 2.5 s ago is still live; 3.5 s is not.
    const cap = new RunCapture(['A'], { ...SETTINGS, revolutions: 10, settleRevolutions: 0 });
    expect(cap.push(frame(60, { A: [3, 10] }, 2.5), 0).waiting).toBeNull();
    expect(cap.push(frame(60, { A: [3, 10] }, 3.5), 4000).waiting).toMatch(
      /no trusted revolution for 3\.5 s/,
    );
  });

  it('fails naming the sensor when a 1x vector is missing', () => {
    const cap = new RunCapture(['A', 'B'], { ...SETTINGS, settleRevolutions: 0 });
    feed(cap, () => frame(1500, { A: [3, 10] }));
    expect(cap.failed).toMatch(/no 1x vector for B/);
  });

  it('waits for a first speed and reports why', () => {
    const cap = new RunCapture(['A'], SETTINGS);
    const p = cap.push(frame(null, {}), 0);
    expect(p.waiting).toMatch(/no speed yet/);
    expect(cap.finished).toBe(false);
  });
});
