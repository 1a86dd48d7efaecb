#!/usr/bin/env node
import { isUserError } from '../errors.js';
import { commands } from './commands/index.js';

function help(): string {
  const w = Math.max(...commands.map((c) => c.name.length));
  return (
    'turnwise: vibration watch and balancing for one critical fan\n\nCommands:\n' +
    commands.map((c) => `  ${c.name.padEnd(w)}  ${c.summary}`).join('\n') +
    '\n\n`turnwise help COMMAND` shows a command\'s usage.\n'
  );
}

export async function main(argv: string[]): Promise<number> {
  const [name, ...rest] = argv;
  if (!name || name === 'help' || name === '--help' || name === '-h') {
    const target = rest[0] && commands.find((c) => c.name === rest[0]);
    process.stdout.write(target ? `usage: ${target.usage}\n` : help());
    return 0;
  }
  const cmd = commands.find((c) => c.name === name);
  if (!cmd) {
    process.stderr.write(`turnwise: unknown command "${name}"\n  -> run \`turnwise help\` for the list of commands\n`);
    return 2;
  }
  try {
    return await cmd.run(rest);
  } catch (e) {
    if (isUserError(e)) {
      process.stderr.write(`turnwise ${name}: ${e.format()}\n`);
      return e.exitCode;
    }
    throw e;
  }
}

main(process.argv.slice(2)).then(
  (code) => {
    process.exitCode = code;
  },
  (e: unknown) => {
    process.stderr.write(`turnwise: internal error, please report it with the command you ran:\n${(e as Error)?.stack ?? String(e)}\n`);
    process.exitCode = 70;
  },
);
