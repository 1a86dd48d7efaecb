import { randomBytes } from 'node:crypto';
import { chmodSync, closeSync, fsyncSync, openSync, writeSync } from 'node:fs';
import { loadConfig } from '../../config/load.js';
import { UserError } from '../../errors.js';
import { resolveLiveTokens } from '../../live/auth.js';
import { parseCommandArgs } from '../args.js';
import type { Command } from '../command.js';

const usage = `turnwise live SUB-COMMAND ...   (the technician's live page and balancing workbench)

  make-token FILE [--force]
      Writes a new random access token (32 random bytes, base64url: 43 characters) to FILE with
      mode 600 and prints the config lines that use it. The token itself is not printed: hand it
      to its holder from the file (e.g. sudo cat FILE). Refuses to overwrite FILE without --force.

  check --config FILE [--json]
      Reads the config's live section and every token it names (without printing them) and says
      where the page will listen, whether over TLS, and who holds which role.

The page itself is served by the running agent when the config has a live section.`;

function makeToken(argv: string[]): number {
  const { values, positionals } = parseCommandArgs('live make-token', usage, argv, {
    force: { type: 'boolean' },
  });
  if (positionals.length !== 1)
    throw new UserError(
      'turnwise live make-token',
      'expects exactly one FILE',
      'usage: turnwise live make-token FILE [--force]',
    );
  const file = positionals[0]!;
  let fd: number;
  try {
    fd = openSync(file, values.force ? 'w' : 'wx', 0o600);
  } catch (e) {
    const code = (e as NodeJS.ErrnoException).code;
    if (code === 'EEXIST')
      throw new UserError(
        file,
        'already exists',
        'give another file, or --force to replace the token (its holder then needs the new one)',
      );
    throw new UserError(
      file,
      `cannot write the token file (${code ?? String(e)})`,
      'check the directory exists and you may write to it',
    );
  }
  try {
    writeSync(fd, `${randomBytes(32).toString('base64url')}\n`);
    fsyncSync(fd);
  } finally {
    closeSync(fd);
  }
  chmodSync(file, 0o600);
  process.stdout.write(
    `Wrote a new token to ${file} (mode 600).\n` +
      'Use it in the config, with the role of its holder (viewer or operator):\n\n' +
      `live:\n  tokens:\n    - { name: HOLDER, role: operator, file: ${file} }\n\n` +
      "The agent must run as the file's owner. Give the token " +
      'to its holder from the file; it is never logged.\n',
  );
  return 0;
}

function check(argv: string[]): number {
  const { values, positionals } = parseCommandArgs('live check', usage, argv, {
    config: { type: 'string' },
    json: { type: 'boolean' },
  });
  if (positionals.length || !values.config)
    throw new UserError(
      'turnwise live check',
      'needs --config FILE',
      'usage: turnwise live check --config FILE [--json]',
    );
  const cfg = loadConfig(values.config);
  const live = cfg.live;
  if (!live)
    throw new UserError(
      values.config,
      'has no live section, so the agent serves no page',
      'add live: with bind, port and tokens (docs/live-page.md, "Opening it")',
    );
  const tokens = resolveLiveTokens(live);
  const scheme = live.tls ? 'https' : 'http';
  const host = live.bind.includes(':') ? `[${live.bind}]` : live.bind;
  const summary = {
    url: `${scheme}://${host}:${live.port}/`,
    tls: !!live.tls,
    tokens: tokens.map((t) => ({ name: t.name, role: t.role })),
    update_hz: live.update_hz,
    capture: live.capture,
  };
  if (values.json) process.stdout.write(JSON.stringify(summary, null, 2) + '\n');
  else {
    process.stdout.write(
      `${values.config}: live page OK\n  listens on ` +
        `${summary.url}${live.tls ? '' : ' (no TLS: tokens cross the network in clear unless bound to 127.0.0.1)'}\n` +
        tokens.map((t) => `  token "${t.name}": ${t.role}`).join('\n') +
        (`\n  up to ${live.update_hz} updates per second; runs ` +
          `averaged over ${live.capture.revolutions} revolutions\n`),
    );
  }
  return 0;
}

export const liveCommand: Command = {
  name: 'live',
  usage,
  async run(argv) {
    const [sub, ...rest] = argv;
    if (sub === 'make-token') return makeToken(rest);
    if (sub === 'check') return check(rest);
    throw new UserError(
      'turnwise live',
      sub ? `unknown sub-command "${sub}"` : 'needs a sub-command',
      'use make-token or check; `turnwise help live` shows both',
    );
  },
};
