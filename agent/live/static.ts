/**
 * The page's files, served from the installed package: our own HTML, CSS and JavaScript from
 * agent/live/page/, and uPlot's distribution files from node_modules (no CDN: the page works from
 * the board with no internet). Read once when the server starts; only the names listed here are
 * served, so no request path ever reaches the file system.
 */
import { readFileSync } from 'node:fs';
import { createHash } from 'node:crypto';
import { createRequire } from 'node:module';
import { dirname, join } from 'node:path';
import { UserError } from '../errors.js';
import { packageRoot } from '../package-root.js';

export interface StaticFile {
  readonly body: Buffer;
  readonly type: string;
  readonly etag: string;
}

const TYPES: Record<string, string> = {
  '.html': 'text/html; charset=utf-8',
  '.js': 'text/javascript; charset=utf-8',
  '.css': 'text/css; charset=utf-8',
};

/** Our own page files, by URL path. */
export const PAGE_FILES = [
  'index.html',
  'style.css',
  'app.js',
  'format.js',
  'polar.js',
  'trend.js',
  'workbench.js',
  'report.js',
  'sweeps.js',
] as const;

export function defaultPageDir(): string {
  return join(packageRoot(import.meta.url), 'agent', 'live', 'page');
}

function load(file: string): Buffer {
  try {
    return readFileSync(file);
  } catch (e) {
    throw new UserError(
      file,
      `a file of the live page cannot be read (${(e as NodeJS.ErrnoException).code ?? String(e)})`,
      'reinstall turnwise (npm ci in a source tree, ' +
        'deploy/install.sh on a board): the page is part of the package',
    );
  }
}

function entry(body: Buffer, ext: string): StaticFile {
  return {
    body,
    type: TYPES[ext]!,
    etag: `"${createHash('sha256').update(body).digest('base64url').slice(0, 22)}"`,
  };
}

/**
 * Every file the page needs, keyed by URL path ("/", "/app.js", "/vendor/uPlot.iife.min.js" ...).
 */
export function loadStaticFiles(pageDir: string = defaultPageDir()): Map<string, StaticFile> {
  const files = new Map<string, StaticFile>();
  for (const name of PAGE_FILES) {
    const ext = name.slice(name.lastIndexOf('.'));
    files.set(`/${name}`, entry(load(join(pageDir, name)), ext));
  }
  files.set('/', files.get('/index.html')!);
  const require = createRequire(import.meta.url);
  let uplotJs: string;
  try {
    uplotJs = require.resolve('uplot/dist/uPlot.iife.min.js');
  } catch {
    throw new UserError(
      'uplot',
      'the uPlot package (trend plots of the live page) is not installed',
      'run npm ci in the turnwise directory',
    );
  }
  files.set('/vendor/uPlot.iife.min.js', entry(load(uplotJs), '.js'));
  files.set('/vendor/uPlot.min.css', entry(load(join(dirname(uplotJs), 'uPlot.min.css')), '.css'));
  return files;
}
