// `node --import ./test/support/ts-hooks.mjs file.ts` runs the project's TypeScript sources
// directly in a child process (for kill -9 tests), by registering ts-loader.mjs as module hooks.
import { register } from 'node:module';
register('./ts-loader.mjs', import.meta.url);
