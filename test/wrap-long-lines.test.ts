import { describe, expect, it } from 'vitest';
import { canonical, rewriteText, sourceFiles } from '../scripts/wrap-long-lines.mjs';

/**
 * scripts/wrap-long-lines.mjs, which keeps lines within 100 characters where prettier cannot: the
 * check that a rewrite changed nothing must catch real changes, and the rewrite itself must break
 * what it may, leave alone what it must not touch, and keep the canonical syntax tree.
 */

const same = (a: string, b: string) => canonical('t.ts', a).json === canonical('t.ts', b).json;

describe('the equivalence check (canonical syntax trees)', () => {
  it('takes split literals and templates and a rewrapped comment as the same', () => {
    expect(same("f('abc def');", "f('abc ' + 'def');")).toBe(true);
    expect(same("f(x + 'ab');", "f(x + 'a' + 'b');")).toBe(true);
    expect(same('f(`a ${y} b`);', 'f(`a ${y} ` + `b`);')).toBe(true);
    expect(same('f(a + b * c);', 'f(a + (b * c));')).toBe(true);
    const c = (t: string) => canonical('t.ts', t).comments.join(' ');
    expect(c('f(); // one two three\n')).toBe(c('// one two\n// three\nf();\n'));
  });

  it('tells apart changed text, a lost space, re-association, reordering and operators', () => {
    expect(same("f('abc def');", "f('abc dEf');")).toBe(false);
    expect(same("f('abc def');", "f('abc' + 'def');")).toBe(false);
    // x - 'ab' is not x - 'a' + 'b'; 1 + 2 + 'x' is '3x', 1 + (2 + 'x') is '12x'
    expect(same("f(x - 'ab');", "f(x - 'a' + 'b');")).toBe(false);
    expect(same("f(1 + 2 + 'x');", "f(1 + (2 + 'x'));")).toBe(false);
    expect(same('f(`a ${y} b ${z}`);', 'f(`a ${z} ` + `b ${y}`);')).toBe(false);
    expect(same('f(String.raw`a b`);', 'f(String.raw`a ` + String.raw`b`);')).toBe(false);
    expect(same('f((a + b) * c);', 'f(a + b * c);')).toBe(false);
    expect(same('let a = 1;', 'const a = 1;')).toBe(false);
    expect(same('f(-a);', 'f(+a);')).toBe(false);
    const js = (t: string) => canonical('t.js', t).jsdoc;
    expect(js('/** @param {string} a */\nfunction f(a) {}')).not.toBe(
      js('/** @param {number} a */\nfunction f(a) {}'),
    );
    const c = (t: string) => canonical('t.ts', t).comments.join(' ');
    expect(c('// one two three\nf();')).not.toBe(c('// one three\nf();'));
  });
});

describe('the rewrite', () => {
  const long = 'word '.repeat(30).trim();
  const input = [
    `/** ${long} */`,
    `export const a = f('${long}');`,
    'export const b = g(`${a} ' + long + '`);',
    `export const c = h(1); // ${long}`,
    `export const d = /${'x'.repeat(110)}/;`,
    `export const e = String.raw\`${long}\`;`,
    `export function k(x: string): number {`,
    `  switch (x) {`,
    `    case '${long}':`,
    `      return 1;`,
    `  }`,
    `  return 0;`,
    `}`,
    `export const t = { kind: '${long}' } as const;`,
    `export type T = '${long}';`,
    '',
  ].join('\n');

  it('breaks comments, strings and templates and keeps the canonical tree', async () => {
    const out = await rewriteText('test/fixture.ts', input);
    const over = out.split('\n').filter((l) => l.length > 100);
    // Left long and whole: the regex, String.raw, the case label, the `as const` literal and the
    // literal type (prettier moves some of them to a line of their own).
    expect(over.map((l) => l.trim())).toEqual([
      `/${'x'.repeat(110)}/;`,
      `export const e = String.raw\`${long}\`;`,
      `case '${long}':`,
      `kind: '${long}',`,
      `'${long}';`,
    ]);
    expect(out).toMatch(/^\/\*\*\n \* word/);
    expect(out).toMatch(/\n\/\/ word[^\n]*\n\/\/ word[^\n]*\nexport const c = h\(1\);\n/);
    expect(out).toMatch(/f\(\n {2}'word [^']*' \+\n {4}'word/);
    const a = canonical('t.ts', input);
    const b = canonical('t.ts', out);
    expect(b.json).toBe(a.json);
    expect(b.comments).toEqual(a.comments);
    expect(await rewriteText('test/fixture.ts', out)).toBe(out);
  });

  it('covers the folders of the tree and leaves out generated and vendored files', () => {
    const files = sourceFiles();
    expect(files).toContain('agent/live/page/app.js');
    expect(files).toContain('scripts/wrap-long-lines.mjs');
    expect(files).toContain('vitest.config.ts');
    expect(files.some((f) => /^(dist|node_modules)\/|\/vendor\//.test(f))).toBe(false);
  });
});
