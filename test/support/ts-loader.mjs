// Module hooks: resolve "./x.js" imported from a .ts file to "./x.ts" when only the .ts exists,
// and strip types from .ts files with the TypeScript compiler already in devDependencies.
import { existsSync } from 'node:fs';
import { readFile } from 'node:fs/promises';
import { fileURLToPath } from 'node:url';
import ts from 'typescript';

export async function resolve(specifier, context, next) {
  if (specifier.startsWith('.') && specifier.endsWith('.js') && context.parentURL?.endsWith('.ts')) {
    const js = new URL(specifier, context.parentURL);
    const tsUrl = new URL(js.href.slice(0, -3) + '.ts');
    if (!existsSync(fileURLToPath(js)) && existsSync(fileURLToPath(tsUrl))) return { url: tsUrl.href, shortCircuit: true };
  }
  return next(specifier, context);
}

export async function load(url, context, next) {
  if (url.startsWith('file:') && url.endsWith('.ts')) {
    const file = fileURLToPath(url);
    const out = ts.transpileModule(await readFile(file, 'utf8'), {
      fileName: file,
      compilerOptions: { module: ts.ModuleKind.ESNext, target: ts.ScriptTarget.ES2022, inlineSourceMap: true },
    });
    return { format: 'module', source: out.outputText, shortCircuit: true };
  }
  return next(url, context);
}
