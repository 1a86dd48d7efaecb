// After `tsc`: bundles the CLI so `turnwise` starts quickly, and makes it executable.
//
// tsc compiles every module to dist/ (the tests and benches import those). The CLI that users,
// systemd and the tests spawn, dist/agent/cli/main.js, is then replaced by a bundle of the same
// compiled JavaScript made with rolldown: main.js plus one chunk per command (each still loaded by
// dynamic import() only when it runs) and shared chunks, in dist/agent/cli/chunks/. zod and yaml
// are bundled in, so tree-shaking drops what the config schema never uses (zod's 40-odd locales
// among it) and Node reads a few files instead of a few hundred; every other package stays an
// ordinary import from node_modules (native addons, packages that find their own files).
//
// dist/agent/cli/chunks/modules.json lists the modules in each chunk, so a test can tell which
// modules a command loaded from the chunks it read.
import {
  chmodSync,
  existsSync,
  mkdtempSync,
  readFileSync,
  renameSync,
  rmSync,
  writeFileSync,
} from 'node:fs';
import { dirname, join, relative } from 'node:path';
import { fileURLToPath } from 'node:url';
import { rolldown } from 'rolldown';

const root = fileURLToPath(new URL('..', import.meta.url));
const cliDir = join(root, 'dist/agent/cli');
const entry = join(cliDir, 'main.js');
/** Packages bundled into the CLI; all others are imported from node_modules at run time. */
const BUNDLED = new Set(['zod', 'yaml']);

function packageOf(id) {
  const parts = id.split('/');
  return id.startsWith('@') ? parts.slice(0, 2).join('/') : parts[0];
}

if (!existsSync(entry)) {
  console.error(`post-build: ${relative(root, entry)} is missing; run tsc first (npm run build)`);
  process.exit(1);
}
// Run a second time without tsc in between, the entry is the bundle already: bundling it again
// would list chunks as the modules in modules.json. Leave it as it is.
if (/\b(?:from|import\()\s*["']\.\/chunks\//.test(readFileSync(entry, 'utf8'))) {
  console.error(
    `post-build: ${relative(root, entry)} is already the bundle; ` +
      `nothing to do (npm run build compiles and bundles again)`,
  );
  process.exit(0);
}

const out = mkdtempSync(join(root, 'dist/.cli-bundle-'));
try {
  const bundle = await rolldown({
    input: entry,
    platform: 'node',
    logLevel: 'warn',
    external: (id) =>
      id.startsWith('node:') ||
      (!id.startsWith('.') && !id.startsWith('/') && !BUNDLED.has(packageOf(id))),
  });
  const { output } = await bundle.write({
    dir: out,
    format: 'esm',
    entryFileNames: 'main.js',
    chunkFileNames: 'chunks/[name]-[hash].js',
    sourcemap: false,
  });
  await bundle.close();

  const modules = {};
  for (const o of output)
    if (o.type === 'chunk') modules[o.fileName] = o.moduleIds.map((m) => relative(root, m));
  writeFileSync(join(out, 'chunks/modules.json'), JSON.stringify(modules, null, 1) + '\n');

  // Swap in the bundle: the chunks directory first, then the entry that imports them.
  rmSync(join(cliDir, 'chunks'), { recursive: true, force: true });
  renameSync(join(out, 'chunks'), join(cliDir, 'chunks'));
  renameSync(join(out, 'main.js'), entry);
  // tsc's source map belongs to the unbundled main.js.
  rmSync(`${entry}.map`, { force: true });
} finally {
  rmSync(out, { recursive: true, force: true });
}
chmodSync(entry, 0o755);
console.error(
  `post-build: bundled the CLI into ${relative(root, dirname(entry))}/main.js ` +
    `and chunks/ (${BUNDLED.size} packages inlined: ${[...BUNDLED].join(', ')})`,
);
