// Writes config/turnwise.schema.json from the zod schema (run after `npm run build`).
import { writeFileSync } from 'node:fs';
import { configJsonSchema, CONFIG_SCHEMA_PATH } from '../dist/agent/config/json-schema.js';
writeFileSync(new URL(`../${CONFIG_SCHEMA_PATH}`, import.meta.url), JSON.stringify(configJsonSchema(), null, 2) + '\n');
console.log(`wrote ${CONFIG_SCHEMA_PATH}`);
