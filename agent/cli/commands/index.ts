import type { CommandEntry } from '../command.js';

/**
 * Every sub-command, in the order `turnwise help` lists them. Nothing is imported here at the top:
 * each command's module loads by dynamic import() only when that command runs, so `turnwise help`
 * and light commands start without the dependencies of the others.
 */
export const commands: readonly CommandEntry[] = [
  {
    name: 'analyze',
    summary: 'measure overall velocity and order vectors (1x, 2x, ...) from a WAV recording',
    load: async () => (await import('./analyze.js')).analyzeCommand,
  },
  {
    name: 'balance',
    summary:
      'balancing: solve a job, amplitude-only four-run, multi-speed, ' +
      'split or combine weights, trial weight, ISO 21940-11 check',
    load: async () => (await import('./balance.js')).balanceCommand,
  },
  {
    name: 'check-config',
    summary: 'validate a YAML config file and print what it sets',
    load: async () => (await import('./check-config.js')).checkConfigCommand,
  },
  {
    name: 'condition',
    summary: 'show baseline, last reported zone and trend; learn or clear the 1x baseline',
    load: async () => (await import('./condition.js')).conditionCommand,
  },
  {
    name: 'demo',
    summary:
      'the whole product on a laptop: simulated demo ' +
      'fan, MQTT broker, live page, a week in minutes',
    load: async () => (await import('./demo.js')).demoCommand,
  },
  {
    name: 'events',
    summary:
      'list the events the agent kept under state_dir (survives reboots; the journal may not)',
    load: async () => (await import('./events.js')).eventsCommand,
  },
  {
    name: 'live',
    summary: 'make access tokens for the live page and check its config',
    load: async () => (await import('./live.js')).liveCommand,
  },
  {
    name: 'mqtt',
    summary: 'plant-network helpers: topic layout, outbox contents, payload schemas',
    load: async () => (await import('./mqtt.js')).mqttCommand,
  },
  {
    name: 'outputs-off',
    summary:
      'drop the advisory relay and lamp (run by systemd ' +
      'after the agent stopped, however it stopped)',
    load: async () => (await import('./outputs-off.js')).outputsOffCommand,
  },
  {
    name: 'probe-serial',
    summary: 'list serial ports, or listen to the acquisition board and report what it sends',
    load: async () => (await import('./probe-serial.js')).probeSerialCommand,
  },
  {
    name: 'run',
    summary:
      'the agent: acquire, measure, watch, publish over ' +
      'MQTT, drive the advisory, serve the live page',
    load: async () => (await import('./run.js')).runCommand,
  },
  {
    name: 'sim-board',
    summary:
      'play the simulated fan as the serial acquisition board ' +
      'on a pseudo-terminal, in real time, until stopped',
    load: async () => (await import('./sim-board.js')).simBoardCommand,
  },
  {
    name: 'simulate',
    summary:
      'play a scenario on the simulated fan and record it as ' +
      "a WAV file (float32 volts, the board's channel map)",
    load: async () => (await import('./simulate.js')).simulateCommand,
  },
  {
    name: 'sweep',
    summary:
      'find run-ups and coast-downs in a recording: 1x ' +
      'vector against speed (Bode, polar) and resonances',
    load: async () => (await import('./sweep.js')).sweepCommand,
  },
  {
    name: 'zone',
    summary:
      'classify one handheld velocity reading against ISO ' +
      '20816-3 or ISO 14694, with the boundaries and their source',
    load: async () => (await import('./zone.js')).zoneCommand,
  },
];
