import { advisorySettings } from '../../advisory/advisory.js';
import { releaseAdvisoryOutputs } from '../../advisory/release.js';
import { UserError } from '../../errors.js';
import type { Logger } from '../../log.js';
import { defaultLastGoodPath, loadGuardedConfig } from '../../runtime/config-guard.js';
import { parseCommandArgs } from '../args.js';
import { openBoardGpio } from '../board-gpio.js';
import type { Command } from '../command.js';

const usage = 'turnwise outputs-off --config CFG.yaml [--last-good FILE]';

/** GPIO progress in plain lines on stderr (the journal, when systemd runs this). */
const stderrLogger: Logger = {
  debug() {},
  info: (_f, msg) => void process.stderr.write(`turnwise outputs-off: ${msg}\n`),
  warn: (_f, msg) => void process.stderr.write(`turnwise outputs-off: ${msg}\n`),
  error: (_f, msg) => void process.stderr.write(`turnwise outputs-off: ${msg}\n`),
};

/**
 * Drops the safe-stop advisory's relay and lamp. systemd runs it after every stop of the service
 * (ExecStopPost): after an orderly stop it finds them dropped already; after kill -9, a crash or
 * the watchdog's abort it drops what the dead agent left energised.
 */
export const outputsOffCommand: Command = {
  name: 'outputs-off',
  usage,
  async run(argv) {
    const { values, positionals } = parseCommandArgs('outputs-off', usage, argv, {
      config: { type: 'string', short: 'c' },
      'last-good': { type: 'string' },
    });
    if (!values.config || positionals.length > 0)
      throw new UserError(
        'turnwise outputs-off',
        values.config ? `unexpected argument "${positionals[0]}"` : 'missing --config',
        `usage: ${usage}`,
      );
    // The lines of the config the agent ran on: the given one, or the last good copy it fell back
    // to.
    const { config, from } = loadGuardedConfig(
      values.config,
      values['last-good'] ?? defaultLastGoodPath(),
    );
    if (!config.advisory) {
      process.stdout.write(`no advisory outputs in ${from}: nothing to drop\n`);
      return 0;
    }
    // The same chip as `turnwise run` (gpio.chip_label).
    const gpio = (await openBoardGpio(config, stderrLogger))!;
    const dropped = await releaseAdvisoryOutputs(
      gpio,
      advisorySettings(config.advisory, config.sensors),
    );
    process.stdout.write(
      `dropped (de-energised): ${dropped.join(', ') || 'none configured'} (config ${from})\n`,
    );
    return 0;
  },
};
