// Preload (`node --import ./test/support/import-log.mjs ...`): appends the URL of every module the
// process resolves through import to the file named by TW_IMPORT_LOG, one per line. Used by
// test/cli-start.test.ts to see which packages a command loads.
import { register } from 'node:module';

register('./import-log-hooks.mjs', import.meta.url, { data: { file: process.env.TW_IMPORT_LOG } });
