import { z } from 'zod';
import { configSchema } from './schema.js';

/** JSON Schema of the config file (what a user may write, defaults not required), for editors. */
export function configJsonSchema(): Record<string, unknown> {
  return {
    ...z.toJSONSchema(configSchema, { io: 'input', unrepresentable: 'any' }),
    $id: 'https://turnwise.invalid/schemas/config.json',
    title: 'turnwise configuration',
  };
}

export const CONFIG_SCHEMA_PATH = 'config/turnwise.schema.json';
