import type { GpioLines } from '../../drivers/gpio/types.js';
import type { AdvisorySettings } from './advisory.js';

/** The outputs the advisory drives, with the names it opens them under. */
export function advisoryOutputs(
  s: Pick<AdvisorySettings, 'relay' | 'lamp'>,
): { role: 'relay' | 'lamp'; name: string; line: number; activeLow: boolean }[] {
  const out: { role: 'relay' | 'lamp'; name: string; line: number; activeLow: boolean }[] = [];
  if (s.relay)
    out.push({
      role: 'relay',
      name: 'advisory relay',
      line: s.relay.line,
      activeLow: s.relay.activeLow,
    });
  if (s.lamp)
    out.push({
      role: 'lamp',
      name: 'advisory lamp',
      line: s.lamp.line,
      activeLow: s.lamp.activeLow,
    });
  return out;
}

/**
 * Drops the advisory outputs (relay and lamp de-energised): what the agent does when it stops in
 * order, done from outside after it stopped in any other way. A GPIO line keeps its level when the
 * process that drove it dies (kill -9, a crash, the service watchdog's abort), so systemd runs this
 * after every stop of the service (ExecStopPost, deploy/turnwise.service). The lines are left
 * driven at the de-energised level, not released, since a released line may float.
 * Returns the names of the outputs dropped; rejects when a line cannot be driven.
 */
export async function releaseAdvisoryOutputs(
  gpio: GpioLines,
  s: Pick<AdvisorySettings, 'relay' | 'lamp'>,
): Promise<string[]> {
  const dropped: string[] = [];
  for (const o of advisoryOutputs(s)) {
    const line = await gpio.output(o.name, o.line, { activeLow: o.activeLow, initial: false });
    await line.write(false);
    dropped.push(o.name);
  }
  return dropped;
}
