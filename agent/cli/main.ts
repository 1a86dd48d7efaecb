#!/usr/bin/env node
// Only light modules are imported here: a command's own module (and zod, mqtt, aedes,
// serialport...) loads when that command runs, so `turnwise help` and the Node version check start
// at once.
import { isUserError } from '../errors.js';
import { commands } from './commands/index.js';
import { nodeVersionProblem } from './node-version.js';

function help(): string {
  const w = Math.max(...commands.map((c) => c.name.length));
  return (
    'turnwise: vibration watch and balancing for one critical fan\n\nCommands:\n' +
    commands.map((c) => `  ${c.name.padEnd(w)}  ${c.summary}`).join('\n') +
    "\n\n`turnwise help COMMAND` shows a command's usage.\n"
  );
}

export async function main(argv: string[]): Promise<number> {
  const [name, ...rest] = argv;
  if (!name || name === 'help' || name === '--help' || name === '-h') {
    const target = rest[0] ? commands.find((c) => c.name === rest[0]) : undefined;
    if (rest[0] && !target) {
      process.stderr.write(
        `turnwise help: unknown command "${rest[0]}"\n` +
          `  -> run \`turnwise help\` for the list of commands\n`,
      );
      return 2;
    }
    process.stdout.write(target ? `usage: ${(await target.load()).usage}\n` : help());
    return 0;
  }
  const cmd = commands.find((c) => c.name === name);
  if (!cmd) {
    process.stderr.write(
      `turnwise: unknown command "${name}"\n  -> run \`turnwise help\` for the list of commands\n`,
    );
    return 2;
  }
  try {
    return await (await cmd.load()).run(rest);
  } catch (e) {
    if (isUserError(e)) {
      process.stderr.write(`turnwise ${name}: ${e.format()}\n`);
      return e.exitCode;
    }
    throw e;
  }
}

const tooOld = nodeVersionProblem(process.versions.node);
if (tooOld) {
  process.stderr.write(tooOld);
  process.exitCode = 2;
} else {
  main(process.argv.slice(2)).then(
    (code) => {
      process.exitCode = code;
    },
    (e: unknown) => {
      process.stderr.write(
        `turnwise: internal error, please report it with the ` +
          `command you ran:\n${(e as Error)?.stack ?? String(e)}\n`,
      );
      process.exitCode = 70;
    },
  );
}
