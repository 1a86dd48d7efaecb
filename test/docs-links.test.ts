import { mkdtempSync, readdirSync, readFileSync, rmSync, writeFileSync, mkdirSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join, resolve } from 'node:path';
import { describe, expect, it } from 'vitest';
import { anchorsOf, checkLinks, slug } from './support/doc-links.js';
import { configJsonSchema } from '../agent/config/json-schema.js';
// @ts-expect-error plain JavaScript module without type declarations
import { configReference, CONFIG_DOC_PATH } from '../scripts/config-doc.mjs';

const root = resolve(import.meta.dirname, '..');
const docs = readdirSync(join(root, 'docs'))
  .filter((f) => f.endsWith('.md'))
  .map((f) => join(root, 'docs', f));
const README_MAX_LINES = 260;

describe('README and docs/', () => {
  it(`README.md is at most ${README_MAX_LINES} lines`, () => {
    const lines = readFileSync(join(root, 'README.md'), 'utf8')
      .replace(/\n$/, '')
      .split('\n').length;
    expect(lines).toBeLessThanOrEqual(README_MAX_LINES);
  });

  it('every relative link and anchor in README.md, DEVELOPERS.md and docs/*.md resolves', () => {
    const problems = checkLinks(
      [
        join(root, 'README.md'),
        join(root, 'DEVELOPERS.md'),
        join(root, 'drivers/serial/PROTOCOL.md'),
        ...docs,
      ],
      root,
    );
    expect(problems.map((p) => `${p.file}:${p.line}: (${p.target}) ${p.problem}`)).toEqual([]);
  });

  it('README links every page under docs/ from its map', () => {
    const readme = readFileSync(join(root, 'README.md'), 'utf8');
    const missing = docs
      .map((f) => `docs/${f.split('/').pop()}`)
      .filter((p) => !readme.includes(`](${p})`));
    expect(missing).toEqual([]);
  });

  it('no page cites a document that is not in the repository ("field notes")', () => {
    for (const f of [join(root, 'README.md'), ...docs]) {
      expect(readFileSync(f, 'utf8'), f).not.toMatch(/field[ -]notes/i);
    }
  });

  it(`${CONFIG_DOC_PATH} is up to date with the zod schema (run \`npm run schema\`)`, () => {
    const expected = configReference(JSON.parse(JSON.stringify(configJsonSchema())));
    expect(readFileSync(join(root, CONFIG_DOC_PATH), 'utf8')).toBe(expected);
  });

  it('the configuration reference lists every leaf key of the schema with a default, a type and a basis', () => {
    const page = readFileSync(join(root, CONFIG_DOC_PATH), 'utf8');
    // Keys checked by hand against agent/config/*.ts: one per section, and the defaults' sources.
    expect(page).toMatch(
      /\| `watcher\.on_delay_s` \| number [^|]*\| `2` \| s \| API 670 \(from memory\)/,
    );
    expect(page).toMatch(
      /\| `advisory\.min_channels` \| integer [^|]*\| `2` \| {2}\| API 670 \(from memory\)/,
    );
    expect(page).toMatch(
      /\| `watcher\.unbalance\.hv_ratio_max` \| number [^|]*\| `3` \| {2}\| common practice/,
    );
    expect(page).toMatch(
      /\| `mqtt\.outbox_max_mb` \| number [^|]*\| `8` \| MiB \| project's choice/,
    );
    expect(page).toMatch(/\| `acquisition\.baud` \| integer [^|]*\| `921600` \| bit\/s \|/);
    expect(page).toMatch(/\| `live\.capture\.revolutions` \| integer [^|]*\| `100` \|/);
    expect(page).toMatch(
      /\| `sensors\[\]\.sensitivity_mv_per_g` \| number [^|]*\| \(required\) \| mV\/g \|/,
    );
    // Every row has a non-empty meaning.
    const rows = page.split('\n').filter((l) => l.startsWith('| `'));
    expect(rows.length).toBeGreaterThan(150);
    const empty = rows.filter(
      (l) => /\|\s*\|$/.test(l) && !/\| (object|list of object[^|]*) \|/.test(l),
    );
    expect(empty).toEqual([]);
  });
});

describe('the link checker itself', () => {
  it('slugs headings as GitHub does', () => {
    expect(slug('As the serial board: turnwise sim-board')).toBe(
      'as-the-serial-board-turnwise-sim-board',
    );
    expect(slug('Durable outbox (<state_dir>/outbox/)')).toBe('durable-outbox-state_diroutbox');
    expect([...anchorsOf('# A\n## Tests\n```\n# not a heading\n```\n## Tests\n')]).toEqual([
      'a',
      'tests',
      'tests-1',
    ]);
  });

  it('finds a missing file, a missing anchor, and ignores links in code and URLs', () => {
    const dir = mkdtempSync(join(tmpdir(), 'turnwise-links-'));
    try {
      mkdirSync(join(dir, 'docs'));
      writeFileSync(join(dir, 'docs', 'a.md'), '# Page A\n\n## The part\n');
      writeFileSync(
        join(dir, 'README.md'),
        [
          '[ok](docs/a.md) [ok anchor](docs/a.md#the-part) [url](https://example.invalid/x.md)',
          '[gone](docs/b.md)',
          '[bad anchor](docs/a.md#no-such-part)',
          '`[in code](docs/c.md)`',
          '```',
          '[in a fence](docs/d.md)',
          '```',
          '![picture](docs/e.png)',
        ].join('\n'),
      );
      const problems = checkLinks([join(dir, 'README.md')], dir);
      expect(problems.map((p) => [p.line, p.target])).toEqual([
        [2, 'docs/b.md'],
        [3, 'docs/a.md#no-such-part'],
        [8, 'docs/e.png'],
      ]);
    } finally {
      rmSync(dir, { recursive: true, force: true });
    }
  });
});
