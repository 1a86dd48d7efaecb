// Makes the compiled CLI entry executable so `npm ci` leaves a runnable `turnwise`.
import { chmodSync, existsSync } from 'node:fs';
const entry = new URL('../dist/agent/cli/main.js', import.meta.url);
if (existsSync(entry)) chmodSync(entry, 0o755);
