// Module hooks: resolve "./x.js" imported from a .ts file to "./x.ts" when only the .ts exists,
// and strip types from .ts files with the TypeScript compiler already in devDependencies.
// Output is cached under node_modules/.cache (keyed by path, size and mtime), so a child process
// restarted many times loads the compiler only once.
import { createHash } from 'node:crypto';
import { existsSync, mkdirSync, readFileSync, statSync, writeFileSync, renameSync } from 'node:fs';
import { fileURLToPath } from 'node:url';

const cacheDir = fileURLToPath(new URL('../../node_modules/.cache/tw-ts-loader/', import.meta.url));
let ts = null;

export async function resolve(specifier, context, next) {
  if (
    specifier.startsWith('.') &&
    specifier.endsWith('.js') &&
    context.parentURL?.endsWith('.ts')
  ) {
    const js = new URL(specifier, context.parentURL);
    const tsUrl = new URL(js.href.slice(0, -3) + '.ts');
    if (!existsSync(fileURLToPath(js)) && existsSync(fileURLToPath(tsUrl)))
      return { url: tsUrl.href, shortCircuit: true };
  }
  return next(specifier, context);
}

export async function load(url, context, next) {
  if (!url.startsWith('file:') || !url.endsWith('.ts')) return next(url, context);
  const file = fileURLToPath(url);
  const st = statSync(file);
  const key = createHash('sha1').update(`${file}\0${st.size}\0${st.mtimeMs}`).digest('hex');
  const cached = `${cacheDir}${key}.mjs`;
  if (existsSync(cached))
    return { format: 'module', source: readFileSync(cached, 'utf8'), shortCircuit: true };
  ts ??= (await import('typescript')).default;
  const out = ts.transpileModule(readFileSync(file, 'utf8'), {
    fileName: file,
    compilerOptions: {
      module: ts.ModuleKind.ESNext,
      target: ts.ScriptTarget.ES2022,
      inlineSourceMap: true,
    },
  });
  mkdirSync(cacheDir, { recursive: true });
  const tmp = `${cached}.${process.pid}.tmp`;
  writeFileSync(tmp, out.outputText);
  renameSync(tmp, cached);
  return { format: 'module', source: out.outputText, shortCircuit: true };
}
