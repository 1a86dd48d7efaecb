import { existsSync, readFileSync, statSync } from 'node:fs';
import { dirname, relative, resolve } from 'node:path';

/**
 * Relative links in Markdown files: every `[text](target)` and `![alt](target)` outside code
 * (fenced blocks and inline code) whose target is not a URL must name a file or folder that exists,
 * and a `#fragment` must name a heading of the target, slugged as GitHub does (lower case, only
 * letters, digits, spaces, "-" and "_" kept, spaces to "-", repeats numbered -1, -2 ...).
 */

export interface LinkProblem {
  file: string;
  line: number;
  target: string;
  problem: string;
}

/** GitHub's heading anchor for one heading text. */
export function slug(heading: string): string {
  return heading
    .trim()
    .toLowerCase()
    .replace(/[^\p{L}\p{N} _-]/gu, '')
    .replace(/ /g, '-');
}

/** Lines with fenced code blocks blanked (line numbers kept). */
function outsideFences(text: string): string[] {
  let fence: string | null = null;
  return text.split('\n').map((line) => {
    const m = /^\s*(```+|~~~+)/.exec(line);
    if (m) {
      if (fence === null) fence = m[1]!.slice(0, 3);
      else if (m[1]!.startsWith(fence)) fence = null;
      return '';
    }
    return fence !== null ? '' : line;
  });
}

/** Lines outside fenced code with inline code spans removed. */
function proseLines(text: string): string[] {
  return outsideFences(text).map((line) => line.replace(/`+[^`]*`+/g, '``'));
}

/** Anchors of every heading in a Markdown file. */
export function anchorsOf(text: string): Set<string> {
  const seen = new Map<string, number>();
  const out = new Set<string>();
  for (const line of outsideFences(text).map((l) => l.replace(/`/g, ''))) {
    const m = /^#{1,6}\s+(.*?)\s*#*\s*$/.exec(line);
    if (!m) continue;
    const base = slug(m[1]!);
    const n = seen.get(base) ?? 0;
    seen.set(base, n + 1);
    out.add(n === 0 ? base : `${base}-${n}`);
  }
  return out;
}

export function checkLinks(files: readonly string[], root: string): LinkProblem[] {
  const problems: LinkProblem[] = [];
  const linkRe = /!?\[[^\]]*\]\(\s*<?([^)\s>]+)>?(?:\s+"[^"]*")?\s*\)/g;
  for (const file of files) {
    const text = readFileSync(file, 'utf8');
    const lines = proseLines(text);
    lines.forEach((line, i) => {
      for (const m of line.matchAll(linkRe)) {
        const target = m[1]!;
        if (/^[a-z][a-z0-9+.-]*:/i.test(target)) continue; // http:, https:, mailto:, file:
        const [pathPart, fragment] = target.split('#', 2) as [string, string | undefined];
        const where = { file: relative(root, file), line: i + 1, target };
        const dest = pathPart === '' ? file : resolve(dirname(file), decodeURIComponent(pathPart));
        if (!existsSync(dest)) {
          problems.push({ ...where, problem: `${relative(root, dest)} does not exist` });
          continue;
        }
        if (fragment !== undefined) {
          if (statSync(dest).isDirectory() || !dest.endsWith('.md')) {
            problems.push({
              ...where,
              problem:
                `#${fragment} points into ${relative(root, dest)}, which ` +
                `is not a Markdown file`,
            });
          } else if (!anchorsOf(readFileSync(dest, 'utf8')).has(fragment)) {
            problems.push({
              ...where,
              problem: `${relative(root, dest)} has no heading whose anchor is #${fragment}`,
            });
          }
        }
      }
    });
  }
  return problems;
}
