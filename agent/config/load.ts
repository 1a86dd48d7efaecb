import { readFileSync } from 'node:fs';
import { parseDocument } from 'yaml';
import type { z } from 'zod';
import { UserError } from '../errors.js';
import { configSchema, type Config } from './schema.js';

/** Renders a zod issue path the way it is written in YAML: `sensors[1].channel`. */
export function formatPath(path: readonly PropertyKey[]): string {
  let out = '';
  for (const p of path) {
    if (typeof p === 'number') out += `[${p}]`;
    else out += out ? `.${String(p)}` : String(p);
  }
  return out || '(top level)';
}

function describeFound(value: unknown): string {
  if (value === undefined) return 'nothing';
  if (value === null) return 'null';
  if (typeof value === 'string') return JSON.stringify(value);
  if (typeof value === 'object') return Array.isArray(value) ? 'a list' : 'a mapping';
  return String(value);
}

/** The value at a zod issue path inside the raw parsed document (undefined when absent). */
export function valueAt(root: unknown, path: readonly PropertyKey[]): unknown {
  let cur: unknown = root;
  for (const p of path) {
    if (cur === null || typeof cur !== 'object') return undefined;
    cur = (cur as Record<PropertyKey, unknown>)[p as string];
  }
  return cur;
}

/**
 * One line per problem: where, what was expected, what was found. `keysReference` names the
 * document to check spelling against when a key is unknown.
 */
export function formatIssues(
  file: string,
  issues: readonly z.core.$ZodIssue[],
  raw: unknown,
  keysReference = 'docs/configuration.md (or config/turnwise.schema.json)',
): string[] {
  return issues.map((iss) => {
    const where = formatPath(iss.path);
    if (iss.code === 'unrecognized_keys') {
      return (
        `${file}: ${where}: unknown key(s) ${iss.keys.map((k) => `"${k}"`).join(', ')}; ` +
        `check the spelling against ${keysReference}`
      );
    }
    const found = describeFound(valueAt(raw, iss.path));
    return `${file}: ${where}: ${iss.message} (found ${found})`;
  });
}

/** Validates an already-parsed object. Throws UserError listing every problem. */
export function validateConfig(raw: unknown, file = 'config'): Config {
  const res = configSchema.safeParse(raw);
  if (!res.success) {
    const lines = formatIssues(file, res.error.issues, raw);
    throw new UserError(
      file,
      `${lines.length} problem(s) in the configuration:\n  ${lines.join('\n  ')}`,
      'fix the file and run `turnwise check-config FILE` again',
    );
  }
  return res.data;
}

/**
 * Reads a YAML file into plain data. `kind` names the file in messages ("config", "scenario") and
 * `example` is a path shown when the file is missing. Throws UserError for unreadable files and bad
 * YAML.
 */
export function readYamlFile(file: string, kind: string, example: string): unknown {
  let text: string;
  try {
    text = readFileSync(file, 'utf8');
  } catch (e) {
    const code = (e as NodeJS.ErrnoException).code;
    throw new UserError(
      file,
      code === 'ENOENT'
        ? `${kind} file not found`
        : `cannot read ${kind} file (${code ?? String(e)})`,
      `give the path of a YAML ${kind}, e.g. ${example}`,
    );
  }
  const doc = parseDocument(text, { prettyErrors: true });
  if (doc.errors.length > 0) {
    const first = doc.errors[0]!;
    const pos = first.linePos?.[0];
    const at = pos ? `line ${pos.line}, column ${pos.col}` : 'unknown position';
    throw new UserError(
      file,
      `not valid YAML at ${at}: ${first.message.split('\n')[0]}`,
      'fix the YAML syntax (indentation, colons, quotes)',
    );
  }
  return doc.toJS();
}

/** Reads and validates a YAML config file. Throws UserError naming the file and each problem. */
export function loadConfig(file: string): Config {
  return validateConfig(readYamlFile(file, 'config', 'config/example.yaml'), file);
}
