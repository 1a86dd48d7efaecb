import { describe, expect, it } from 'vitest';
import { loadConfig } from '../agent/config/load.js';
import { Analyzer } from '../agent/dsp/analyzer.js';
import { loadScenario, resolveScenario } from '../drivers/sim/scenario.js';
import { SimSource } from '../drivers/sim/source.js';
import { angleDiff } from './sim-fixtures.js';

/**
 * Cross-check of two parts built apart: the measurement core reads the simulated demo fan and must
 * find the 1x vectors the simulator's physics put there (same phase convention, same units). The
 * physics and the DSP are each checked against outside references in their own tests.
 */
describe('measurement core on the simulated fan', () => {
  const cfg = loadConfig('config/example.yaml');
  const plan = resolveScenario(loadScenario('config/example-scenario.yaml'), cfg);

  for (const boardTimesTach of [false, true]) {
    it(`finds the model's 1x at every sensor, tach ${boardTimesTach ? 'timed by the board' : 'found on its channel'} (day 5 15:00 of the invented Kessrow fan)`, async () => {
      const src = new SimSource(plan, {
        startS: 5.625 * 86400,
        blockSamples: 2560,
        pace: 'fast',
        totalSamples: 10 * 25600,
        boardTachEdges: boardTimesTach,
      });
      const info = await src.open();
      const an = new Analyzer({
        config: cfg,
        sampleRate: info.sampleRate,
        channelCount: info.channelCount,
        maxBlock: 2560,
        totalSamples: info.totalSamples,
        boardTimesTach,
      });
      for await (const item of src.items()) an.push(item);
      const w = an.takeWindow();
      expect(w.revolutions).toBeGreaterThan(240);
      for (const m of src.modelOrder(1)) {
        const got = w.channels.find((c) => c.id === m.id)!.orders['1']!;
        expect(Math.abs(got.amp_pk_mm_s / m.amp_pk_mm_s - 1)).toBeLessThan(0.01);
        expect(Math.abs(angleDiff(got.phase_deg, m.phase_deg))).toBeLessThan(0.5);
      }
    });
  }
});
