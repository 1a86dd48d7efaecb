import { randomUUID } from 'node:crypto';
import { createSource } from '../../../drivers/create-source.js';
import { systemClock } from '../../clock.js';
import { isUserError, UserError } from '../../errors.js';
import { createPinoLogger, pinoOptionsFromConfig } from '../../logging/pino-logger.js';
import {
  defaultLastGoodPath,
  fallbackConfig,
  keepLastGood,
  loadGuardedConfig,
  type GuardedConfig,
} from '../../runtime/config-guard.js';
import { assemble, type Assembly } from '../../runtime/assemble.js';
import { startChecks } from '../../runtime/start-checks.js';
import { createServiceNotifier } from '../../service/systemd-notifier.js';
import { WatchdogKeeper } from '../../service/watchdog.js';
import { systemTimers } from '../../timers.js';
import { parseCommandArgs } from '../args.js';
import { openBoardGpio } from '../board-gpio.js';
import type { Command } from '../command.js';

const usage = 'turnwise run --config CFG.yaml [--drain-timeout-s S] [--last-good FILE]';

/** Seconds without a closed window after which the service watchdog stops being fed. */
const STALE_WINDOW_S = 120;

interface RunPlan {
  readonly file: string;
  readonly guarded: GuardedConfig;
  readonly lastGood: string;
  readonly drainS: number;
}

/** Signal handling for the whole process: SIGTERM/SIGINT stop whichever agent is running. */
interface StopSwitch {
  current: ((sig: string) => void) | null;
}

export const runCommand: Command = {
  name: 'run',
  usage,
  async run(argv) {
    const { values, positionals } = parseCommandArgs('run', usage, argv, {
      config: { type: 'string', short: 'c' },
      'drain-timeout-s': { type: 'string' },
      'last-good': { type: 'string' },
    });
    if (!values.config || positionals.length > 0)
      throw new UserError(
        'turnwise run',
        values.config ? `unexpected argument "${positionals[0]}"` : 'missing --config',
        `usage: ${usage}`,
      );
    const drainS = values['drain-timeout-s'] === undefined ? 5 : Number(values['drain-timeout-s']);
    if (!(drainS >= 0))
      throw new UserError(
        '--drain-timeout-s',
        `expects seconds (0 or more), got "${values['drain-timeout-s']}"`,
        'e.g. --drain-timeout-s 5',
      );
    const file = values.config;
    const lastGood = values['last-good'] ?? defaultLastGoodPath();
    const guarded = loadGuardedConfig(file, lastGood);
    const stopSwitch: StopSwitch = { current: null };
    let stopRequested: string | null = null;
    const onSignal = (sig: string) => {
      stopRequested = sig;
      stopSwitch.current?.(sig);
    };
    process.once('SIGTERM', () => onSignal('SIGTERM'));
    process.once('SIGINT', () => onSignal('SIGINT'));
    const progress = { measured: false };
    try {
      return await runAgent({ file, guarded, lastGood, drainS }, stopSwitch, progress);
    } catch (e) {
      // A config that loads but cannot start the agent (before its first window) is refused like
      // one that does not load: back to the last good copy, loudly.
      if (!isUserError(e) || progress.measured || guarded.rejected || stopRequested) throw e;
      const fallback = fallbackConfig(file, lastGood, e);
      if (!fallback) throw e;
      return await runAgent({ file, guarded: fallback, lastGood, drainS }, stopSwitch, {
        measured: false,
      });
    }
  },
};

async function runAgent(
  plan: RunPlan,
  stopSwitch: StopSwitch,
  progress: { measured: boolean },
): Promise<number> {
  const { file, guarded, drainS } = plan;
  const cfg = guarded.config;
  startChecks(cfg); // the same as `turnwise check-config`
  const log = createPinoLogger({
    ...pinoOptionsFromConfig(cfg.logging),
    base: { asset: cfg.machine.id },
  });
  if (guarded.rejected) {
    log.error(
      { config: file, running_on: guarded.from },
      `config rejected, monitoring continues on the last good config: ${guarded.rejected.message}`,
    );
  }
  const notifier = createServiceNotifier({ logger: log });
  let keeper: WatchdogKeeper | null = null;
  let assembly: Assembly | null = null;
  try {
    let lastWindowAt = Date.now();
    const firstWindow = () => {
      progress.measured = true;
      if (guarded.from !== file) return;
      keepLastGood(file, plan.lastGood, (e) =>
        log.warn(
          { last_good: plan.lastGood },
          `cannot keep a copy of the config as the last good one ` +
            `(${e.message}); a broken config later would find no fallback`,
        ),
      );
    };
    assembly = await assemble({
      config: cfg,
      clock: systemClock,
      logger: log,
      openGpio: (c) => openBoardGpio(c, log),
      // Relative paths (recording, scenario) are read beside the file the user gave, also when
      // running on the last-good copy (a copy of an earlier version of that file).
      openSource: (c) => createSource(c, file, { log }),
      agentVersion: process.env['npm_package_version'],
      onWindow: () => {
        lastWindowAt = Date.now();
        if (!progress.measured) firstWindow();
      },
      onStarted: () => notifier.ready(`watching ${cfg.machine.id}`),
    });
    const { agent, live } = assembly;
    if (guarded.rejected) {
      agent.queueEvent({
        id: randomUUID(),
        ts: new Date().toISOString(),
        asset: cfg.machine.id,
        type: 'config_rejected',
        severity: 'alarm',
        message:
          `the config ${file} was rejected; monitoring ` +
          `continues on the last good config (${guarded.from})`,
        error: guarded.rejected.message,
      });
    }
    keeper = new WatchdogKeeper(notifier, systemTimers, log, () =>
      (Date.now() - lastWindowAt) / 1000 > STALE_WINDOW_S
        ? `no measurement window for over ${STALE_WINDOW_S} s`
        : null,
    );
    keeper.start();
    stopSwitch.current = (sig: string) => {
      log.info({ signal: sig }, 'stopping');
      notifier.stopping(`stopping on ${sig}`);
      agent.stop();
    };
    if (live) {
      const url = await assembly.startLive();
      log.info({ url }, 'live page ready');
      process.stderr.write(`turnwise run: live page at ${url}\n`);
    }
    const sum = await agent.run(drainS * 1000);
    log.info(
      { windows: sum.windows, events: sum.events, drained: sum.drained, gaps: sum.gaps },
      'run ended',
    );
    return sum.lostInMemory > 0 ? 1 : 0;
  } finally {
    stopSwitch.current = null;
    keeper?.stop();
    await assembly?.stopLive();
    await notifier.close();
  }
}
