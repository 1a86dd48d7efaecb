import { readFileSync } from 'node:fs';
import { join } from 'node:path';
import { z } from 'zod';

/**
 * Validators built from the committed JSON Schema files (config/schemas/mqtt/), not from the zod
 * sources, so the tests check what subscribers will actually rely on.
 */
const dir = join(import.meta.dirname, '..', '..', 'config', 'schemas', 'mqtt');
const cache = new Map<string, z.ZodType>();

export function schemaFile(name: string): z.ZodType {
  let s = cache.get(name);
  if (!s) {
    s = z.fromJSONSchema(JSON.parse(readFileSync(join(dir, `${name}.schema.json`), 'utf8')));
    cache.set(name, s);
  }
  return s;
}

/** Throws with the schema's complaints when `value` does not match `<name>.schema.json`. */
export function assertMatches(name: string, value: unknown): void {
  const r = schemaFile(name).safeParse(value);
  if (!r.success)
    throw new Error(
      `payload does not match ${name}.schema.json: ` +
        `${r.error.issues.map((i) => `${i.path.join('.')}: ${i.message}`).join('; ')}\n` +
        `${JSON.stringify(value)}`,
    );
}
