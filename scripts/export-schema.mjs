// Writes config/turnwise.schema.json from the zod schema (run after `npm run build`), and the
// configuration reference docs/configuration.md from it (scripts/config-doc.mjs).
import { writeFileSync } from 'node:fs';
import { configJsonSchema, CONFIG_SCHEMA_PATH } from '../dist/agent/config/json-schema.js';
import { configReference, CONFIG_DOC_PATH } from './config-doc.mjs';
const schema = configJsonSchema();
writeFileSync(
  new URL(`../${CONFIG_SCHEMA_PATH}`, import.meta.url),
  JSON.stringify(schema, null, 2) + '\n',
);
console.log(`wrote ${CONFIG_SCHEMA_PATH}`);
writeFileSync(
  new URL(`../${CONFIG_DOC_PATH}`, import.meta.url),
  configReference(JSON.parse(JSON.stringify(schema))),
);
console.log(`wrote ${CONFIG_DOC_PATH}`);
