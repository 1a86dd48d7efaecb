import { pulsesPerRevHint } from '../zones.js';
import { Finding, type WatcherRule } from './types.js';

/**
 * Sensor faults and the phase reference (machinery-protection practice: a channel whose sensor or
 * cable has failed is "not OK" and takes no part in any verdict). The faults themselves are found
 * in agent/watcher/health.ts from the signal; this rule says which channels the verdict leaves out
 * and why, and holds the confidence low when the speed betrays a wrong tach.pulses_per_rev.
 */
export const sensorFaults: WatcherRule = {
  name: 'sensor-faults',
  summary:
    'channels not OK (bias, clipping, spikes, flat line, quantisation ' +
    'only, level step) and a lost tach are left out of every rule',
  run({ s, window, health }) {
    const f = new Finding();
    const hint = pulsesPerRevHint(s, window);
    if (hint) {
      f.limits.push(`confidence held low: ${hint.why}`);
      f.facts.confidence_low = true;
    }
    for (const h of health.channels)
      if (!h.ok) f.limits.push(`${h.id} left out: ${h.problems.join('; ')}`);
    for (const h of health.channels)
      if (h.ok && h.doubts.length) f.limits.push(`${h.id} used with doubt: ${h.doubts.join('; ')}`);
    if (health.tach.state !== 'ok') f.limits.push(`no phase rules: ${health.tach.why}`);
    else
      for (const h of health.channels)
        if (h.ok && !h.phase_ok)
          f.limits.push(`${h.id} not used for phase rules: ${h.phase_notes.join('; ')}`);
    return f.done();
  },
};
