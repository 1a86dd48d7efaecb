import { loadConfig } from '../../config/load.js';
import { parseCommandArgs } from '../args.js';
import type { Command } from '../command.js';
import { UserError } from '../../errors.js';
import { startChecks } from '../../runtime/start-checks.js';

const usage = 'turnwise check-config FILE [--json]';

export const checkConfigCommand: Command = {
  name: 'check-config',
  usage,
  async run(argv) {
    const { values, positionals } = parseCommandArgs('check-config', usage, argv, {
      json: { type: 'boolean' },
    });
    const file = positionals[0];
    if (!file || positionals.length > 1)
      throw new UserError(
        'turnwise check-config',
        'expects exactly one config file',
        `usage: ${usage}`,
      );
    const cfg = loadConfig(file);
    // The same checks across sections as `turnwise run` at start.
    try {
      startChecks(cfg);
    } catch (e) {
      if (e instanceof UserError)
        throw new UserError(`${file}: ${e.where}`, e.message.slice(e.where.length + 2), e.hint);
      throw e;
    }
    if (values.json) {
      process.stdout.write(JSON.stringify({ ok: true, file, config: cfg }, null, 2) + '\n');
    } else {
      process.stdout.write(
        `${file}: OK\n  machine ${cfg.machine.id} (ISO 20816-3 group ` +
          `${cfg.machine.group}, ${cfg.machine.support} support)\n` +
          `  tach on channel ${cfg.tach.channel}, ${cfg.tach.pulses_per_rev} pulse(s)/rev, ` +
          `trigger ${cfg.tach.trigger_v} V\n` +
          cfg.sensors
            .map(
              (s) =>
                `  sensor ${s.id}: channel ${s.channel}, ${s.bearing} ` +
                `${s.direction}, ${s.sensitivity_mv_per_g} mV/g`,
            )
            .join('\n') +
          '\n',
      );
    }
    return 0;
  },
};
