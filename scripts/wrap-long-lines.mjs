#!/usr/bin/env node
// Keeps source lines within the print width (100) where prettier cannot: it wraps comments and
// splits string and template literals into `+` concatenations, without changing what the code does.
//
// node scripts/wrap-long-lines.mjs
//   Rewrites the tree: per file, the codemod, then prettier, again until nothing changes.
// node scripts/wrap-long-lines.mjs --check [--verbose]
//   Lists every line that could still be broken (exit 1 if there is one); --verbose also lists the
//   lines over the width that stay, each with the reason.
// node scripts/wrap-long-lines.mjs --verify REF
//   For every file that differs from git REF, compares with REF: the syntax tree with comments
//   dropped, parentheses ignored and concatenations of literals folded; the same for the
//   JavaScript TypeScript emits; the JSDoc tags; the words of all comments, in order. Exit 1 when
//   one differs.
// Options: --width N (default 100); --split-test-titles (also split the title of a describe / it /
// test call, off by default: prettier then moves the whole test body one level in); file paths,
// to limit the run to them. Files: .ts/.mts/.js/.mjs under agent/, drivers/, test/, scripts/ and
// vitest.config.ts, less what .prettierignore names and agent/live/page/vendor/.
//
// What is changed:
// - a one-line /** ... */ over the width becomes a multi-line block (one line per JSDoc tag);
// - a long line in a block comment or a run of // comments is split at spaces under the same
//   prefix; the words that do not fit go to the next line of the same paragraph when there is one
//   (which is wrapped in turn if needed), else to a line of their own; code examples (indented,
//   fenced, @example), tables and hand-aligned columns are left alone;
// - a trailing // comment that makes its line too long moves to its own line(s) above the code;
// - a string literal or untagged template literal in an ordinary expression becomes 'a ' + 'b'
//   (split after a space or a \n escape, never inside ${...}), each piece with the escapes it had.
// What is never changed: regular expressions, tagged templates (String.raw), template text of
// several lines, literals in types, property names, import/export specifiers, case labels,
// decorators, `as const`, directives, element access keys, test titles (unless asked), tool
// directive comments, and words longer than the room (URLs, JSDoc types).

import { execFileSync } from 'node:child_process';
import { existsSync, readdirSync, readFileSync, statSync, writeFileSync } from 'node:fs';
import { join, relative, resolve, sep } from 'node:path';
import { fileURLToPath } from 'node:url';
import ts from 'typescript';

const ROOT = resolve(fileURLToPath(new URL('..', import.meta.url)));
const FOLDERS = ['agent', 'drivers', 'test', 'scripts', 'vitest.config.ts'];
const EXCLUDED = ['node_modules', 'dist', 'agent/live/page/vendor'];
const EXTENSIONS = /\.(ts|mts|cts|js|mjs|cjs)$/;

// ---------------------------------------------------------------------------------------------
// Files

/** .prettierignore as a list of tests on a path relative to the root (the gitignore forms used). */
function ignoreRules() {
  const file = join(ROOT, '.prettierignore');
  if (!existsSync(file)) return [];
  const rules = [];
  for (const raw of readFileSync(file, 'utf8').split('\n')) {
    const line = raw.trim();
    if (line === '' || line.startsWith('#') || line.startsWith('!')) continue;
    const dirOnly = line.endsWith('/');
    let pat = dirOnly ? line.slice(0, -1) : line;
    const anchored = pat.startsWith('/') || pat.includes('/');
    if (pat.startsWith('/')) pat = pat.slice(1);
    const re = new RegExp(
      '^' +
        pat
          .split('*')
          .map((s) => s.replace(/[.+?^${}()|[\]\\]/g, '\\$&'))
          .join('[^/]*') +
        '$',
    );
    rules.push((rel) => {
      const parts = rel.split('/');
      if (anchored) {
        for (let i = 1; i <= parts.length; i++)
          if (re.test(parts.slice(0, i).join('/'))) return true;
        return false;
      }
      // A bare name matches any path segment (a directory) or, without a trailing slash, the file.
      return parts.some((p, i) => re.test(p) && (!dirOnly || i < parts.length - 1));
    });
  }
  return rules;
}

function isExcluded(rel, rules) {
  if (EXCLUDED.some((e) => rel === e || rel.startsWith(e + '/') || rel.split('/').includes(e)))
    return true;
  return rules.some((r) => r(rel));
}

/** The source files the width applies to, relative to the root with "/" separators. */
export function sourceFiles() {
  const rules = ignoreRules();
  const out = [];
  const walk = (rel) => {
    if (isExcluded(rel, rules)) return;
    const abs = join(ROOT, rel);
    if (!existsSync(abs)) return;
    if (statSync(abs).isDirectory()) {
      for (const name of readdirSync(abs).sort()) walk(rel + '/' + name);
    } else if (EXTENSIONS.test(rel)) out.push(rel);
  };
  for (const f of FOLDERS) walk(f);
  return out;
}

function scriptKind(file) {
  return /\.(js|mjs|cjs)$/.test(file) ? ts.ScriptKind.JS : ts.ScriptKind.TS;
}

function parse(file, text) {
  return ts.createSourceFile(file, text, ts.ScriptTarget.Latest, true, scriptKind(file));
}

/** Display width of a line: code points (the tree is ASCII but for a handful of symbols). */
function width(s) {
  let n = 0;
  for (const _ of s) n++;
  return n;
}

// ---------------------------------------------------------------------------------------------
// Tokens and comments

/** The leaf tokens of a file (JSDoc left out), in source order. */
function leafTokens(sf) {
  const tokens = [];
  const collect = (node) => {
    if (node.kind >= ts.SyntaxKind.FirstJSDocNode && node.kind <= ts.SyntaxKind.LastJSDocNode)
      return;
    const kids = node.getChildren(sf);
    if (kids.length === 0) tokens.push(node);
    else for (const k of kids) collect(k);
  };
  collect(sf);
  return tokens;
}

/** Every comment of a file, in source order. */
function commentRanges(sf, tokens) {
  const text = sf.text;
  const comments = [];
  const seen = new Set();
  for (const t of tokens) {
    // A comment on the line of the token before it is that token's trailing comment.
    const ranges = [
      ...(ts.getTrailingCommentRanges(text, t.end) ?? []),
      ...(ts.getLeadingCommentRanges(text, t.pos) ?? []),
    ];
    for (const c of ranges) {
      if (seen.has(c.pos)) continue;
      seen.add(c.pos);
      comments.push(c);
    }
  }
  return comments.sort((a, b) => a.pos - b.pos);
}

/** The words of all comments of a file, in order, without the comment markers. */
function commentWords(sf) {
  const out = [];
  for (const c of commentRanges(sf, leafTokens(sf))) {
    let body = sf.text.slice(c.pos, c.end);
    body =
      c.kind === ts.SyntaxKind.SingleLineCommentTrivia
        ? body.replace(/^\/\//, '')
        : body
            .replace(/^\/\*\*?/, '')
            .replace(/\*\/$/, '')
            .replace(/\n[ \t]*\*(?!\/)/g, '\n');
    out.push(...body.split(/\s+/).filter(Boolean));
  }
  return out;
}

// ---------------------------------------------------------------------------------------------
// Word wrapping (comments)

const TAGS =
  'param|arg|argument|returns?|type|typedef|template|property|prop|throws|see|deprecated|' +
  'default|callback|this|satisfies|overload|example|remarks|since|yields|private|internal';
const TAG_AT = new RegExp(`^@(${TAGS})\\b`);

/**
 * Words of a comment text, split at spaces; a `{...}` (a JSDoc type, an inline {@link ...}) stays
 * one word, and so do `@param {type} name` and `@returns {type}` at the start. A word that must
 * not start a continuation line (a tag, a list marker, a heading or quote marker, a fence,
 * closing punctuation) is glued to the word before it.
 */
function words(text) {
  const raw = [];
  let i = 0;
  while (i < text.length) {
    while (text[i] === ' ') i++;
    if (i >= text.length) break;
    let j = i;
    let depth = 0;
    while (j < text.length && (depth > 0 || text[j] !== ' ')) {
      if (text[j] === '{') depth++;
      else if (text[j] === '}' && depth > 0) depth--;
      j++;
    }
    raw.push(text.slice(i, j));
    i = j;
  }
  if (raw.length > 1 && TAG_AT.test(raw[0])) {
    let n = 1;
    if (raw[1].startsWith('{')) n++;
    if (/^@(param|arg|argument|property|prop|template|typedef|callback)$/.test(raw[0]) && raw[n])
      n++;
    raw.splice(0, n, raw.slice(0, n).join(' '));
  }
  const out = [];
  // A number stays with the word after it ("8 oz"), an operator with both its operands ("c = 1").
  let glue = false;
  for (const w of raw) {
    const bad = /^(@|[-+*>#|]$|\d+[.)]$|```|~~~|[%)\]},.;:!?]|[=<>/]+$|->)/.test(w);
    if ((bad || glue) && out.length > 0) out[out.length - 1] += ' ' + w;
    else out.push(w);
    glue = /^\d[\d.]*$|^([-+*/=<>]|==|->|<-|=>|<=|>=)$/.test(w);
  }
  return out;
}

/** Greedy wrap: lines of at most `avail` columns, except a single word longer than that. */
function wrapWords(text, firstAvail, restAvail) {
  const lines = [];
  let cur = '';
  for (const w of words(text)) {
    const avail = lines.length === 0 ? firstAvail : restAvail;
    if (cur === '') cur = w;
    else if (width(cur) + 1 + width(w) <= avail) cur += ' ' + w;
    else {
      lines.push(cur);
      cur = w;
    }
  }
  if (cur !== '') lines.push(cur);
  return lines;
}

/** A JSDoc line with several tags (`@param {a} x @param {b} y`): one piece per tag. */
function tagSegments(content) {
  const cuts = [0];
  let depth = 0;
  let tick = false;
  for (let i = 1; i < content.length; i++) {
    const ch = content[i];
    if (ch === '`') tick = !tick;
    else if (ch === '{') depth++;
    else if (ch === '}' && depth > 0) depth--;
    else if (ch === '@' && content[i - 1] === ' ' && depth === 0 && !tick) {
      if (TAG_AT.test(content.slice(i))) cuts.push(i);
    }
  }
  return cuts.map((c, k) => content.slice(c, cuts[k + 1] ?? content.length).trim()).filter(Boolean);
}

/** Extra indent for the continuation of a list item or a JSDoc tag line. */
function hangingIndent(content) {
  const bullet = /^([-*+]|\d+[.)]) +/.exec(content);
  if (bullet) return ' '.repeat(bullet[0].length);
  if (/^@\w+/.test(content)) return '  ';
  return '';
}

/** A line that starts something of its own: it takes no words from the line before it. */
function startsBlock(content) {
  // a list item, a tag, a heading, a quote, a fence, a table row, or a label ("JSON: ...")
  return /^([-*+] |\d+[.)] |@|#|>|```|~~~|\||[\w.-]+( [\w.-]+){0,2}: )/.test(content);
}

/** A comment line that looks like columns lined up by hand or a table row. */
function looksTabular(content) {
  if (/^\|/.test(content) || (content.match(/ \| /g) ?? []).length >= 2) return 'table row';
  if ((content.match(/\S {2,}(?=\S)/g) ?? []).length >= 2) return 'columns aligned by hand';
  return null;
}

/** Comments that tell a tool something: never moved or rewrapped. */
const DIRECTIVE = new RegExp(
  '^//\\s*(' +
    ['@ts-', 'eslint', 'prettier-ignore', 'c8 ', 'istanbul ', 'v8 ignore', 'biome-ignore']
      .concat(['#region', '#endregion', '@vitest', '#\\s*source'])
      .join('|') +
    ')|^///',
);

// ---------------------------------------------------------------------------------------------
// Planning

/**
 * The edits that bring over-wide lines of one file within the width, and for every over-wide line
 * the reasons it stays (when no edit addresses it).
 * @returns {{ edits: {start: number, end: number, text: string, line: number, what: string}[],
 *   long: Map<number, string[]>, sf: ts.SourceFile }}
 */
export function plan(file, text, opts) {
  const W = opts.width;
  const sf = parse(file, text);
  const starts = sf.getLineStarts();
  const lineText = (l) =>
    text
      .slice(starts[l], l + 1 < starts.length ? starts[l + 1] - 1 : text.length)
      .replace(/\r$/, '');
  const long = new Map();
  for (let l = 0; l < starts.length; l++) if (width(lineText(l)) > W) long.set(l, []);
  const edits = [];
  if (long.size === 0) return { edits, long, sf };
  const lineOf = (pos) => sf.getLineAndCharacterOfPosition(pos).line;
  const colOf = (pos) => width(text.slice(starts[lineOf(pos)], pos));
  const indentOf = (l) => /^[ \t]*/.exec(lineText(l))[0];
  // rank 1: a reason that only counts when nothing else on the line explains it
  const why = (l, reason, rank = 0) => {
    if (long.has(l)) long.get(l).push({ reason, rank });
  };

  const tokens = leafTokens(sf);
  const multiLineTokenSpans = [];
  for (const t of tokens) {
    const k = t.kind;
    if (
      k === ts.SyntaxKind.StringLiteral ||
      k === ts.SyntaxKind.NoSubstitutionTemplateLiteral ||
      k === ts.SyntaxKind.TemplateHead ||
      k === ts.SyntaxKind.TemplateMiddle ||
      k === ts.SyntaxKind.TemplateTail ||
      k === ts.SyntaxKind.RegularExpressionLiteral
    )
      multiLineTokenSpans.push([t.getStart(sf), t.end]);
  }
  const comments = commentRanges(sf, tokens);
  for (const c of comments) multiLineTokenSpans.push([c.pos, c.end]);
  /** True when `pos` (a line start) lies inside a literal or a comment. */
  const insideToken = (pos) => multiLineTokenSpans.some(([s, e]) => s < pos && pos < e);

  // Regular expressions: reasons only.
  for (const t of tokens) {
    if (t.kind !== ts.SyntaxKind.RegularExpressionLiteral) continue;
    const l = lineOf(t.getStart(sf));
    if (long.has(l) && colOf(t.end) > W - 3) why(l, 'regular expression literal');
  }

  planComments(comments);
  planLiterals();
  return { edits, long, sf };

  // -------------------------------------------------------------------------------------------
  function planComments(list) {
    // Runs of // comments, each alone on its line, one under the other with the same indent.
    const ownLine = (c) => text.slice(starts[lineOf(c.pos)], c.pos).trim() === '';
    const runs = [];
    for (const c of list.sort((a, b) => a.pos - b.pos)) {
      const l0 = lineOf(c.pos);
      if (c.kind === ts.SyntaxKind.SingleLineCommentTrivia && ownLine(c)) {
        const last = runs[runs.length - 1];
        const prev = last?.[last.length - 1];
        if (
          prev &&
          prev.kind === ts.SyntaxKind.SingleLineCommentTrivia &&
          ownLine(prev) &&
          lineOf(prev.pos) === l0 - 1 &&
          indentOf(l0) === indentOf(l0 - 1)
        )
          last.push(c);
        else runs.push([c]);
        continue;
      }
      runs.push([c]);
    }
    for (const run of runs) {
      const c = run[0];
      const l0 = lineOf(c.pos);
      const l1 = lineOf(run[run.length - 1].end);
      let touches = false;
      for (let l = l0; l <= l1; l++) if (long.has(l)) touches = true;
      if (!touches) continue;
      const body = text.slice(c.pos, c.end);
      if (c.kind === ts.SyntaxKind.SingleLineCommentTrivia) {
        if (ownLine(c)) lineCommentRun(run);
        else trailingComment(c, body, l0);
      } else if (l0 === l1) oneLineBlock(c, body, l0);
      else multiLineBlock(c, body, l0);
    }
  }

  /**
   * New text for a sequence of comment lines: each over-wide line is wrapped at spaces; the words
   * that do not fit go to the start of the next line when it continues the same paragraph (same
   * prefix, not a list item, tag, fence or table), which is wrapped in turn if it gets too long;
   * else to a line of their own. Lines before the first over-wide one and after the paragraph
   * stay as they are.
   * Items: { line, full, prefix, cont, content, suffix, editable, reason, jsdoc, target }.
   */
  function rewrap(items, closeLine) {
    const out = [];
    const broken = [];
    let carry = null;
    let changed = false;
    items.forEach((item, i) => {
      let it = item;
      let full = it.full;
      if (carry !== null) {
        if (it.target && it.editable && it.prefix === carry.prefix) {
          it = { ...it, content: carry.text + ' ' + it.content };
          full = it.prefix + it.content + it.suffix;
          changed = true;
        } else out.push(carry.prefix + carry.text);
        carry = null;
      }
      if (width(full) <= W) return out.push(full);
      if (!it.editable) {
        why(it.line, it.reason);
        return out.push(full);
      }
      const segments = it.jsdoc ? tagSegments(it.content) : [it.content];
      const lines = [];
      segments.forEach((s, k) => {
        const hang = hangingIndent(s);
        const first = k === 0 ? it.prefix : it.cont;
        const wrapped = wrapWords(s, W - width(first), W - width(it.cont + hang));
        wrapped.forEach((w, j) => lines.push([j === 0 ? first : it.cont + hang, w]));
      });
      if (lines.length === 0) return out.push(full);
      const last = lines[lines.length - 1];
      if (lines.length === 1 && !(it.suffix && width(last[0] + last[1]) <= W)) {
        why(it.line, unbreakableWord(it.content, 'comment'));
        return out.push(full);
      }
      changed = true;
      if (long.has(it.line)) broken.push(it.line);
      for (const [p, w] of lines.slice(0, -1)) out.push(p + w);
      const next = items[i + 1];
      if (it.suffix === '' && next && next.target && last[0] === next.prefix && lines.length > 1)
        carry = { prefix: last[0], text: last[1] };
      else if (it.suffix !== '' && width(last[0] + last[1] + it.suffix) > W) {
        out.push(last[0] + last[1]);
        out.push(closeLine);
      } else out.push(last[0] + last[1] + it.suffix);
    });
    if (carry !== null) out.push(carry.prefix + carry.text);
    return changed ? { out: out.map((x) => x.trimEnd()), broken } : null;
  }

  function lineCommentRun(run) {
    const items = run.map((c) => {
      const l = lineOf(c.pos);
      const body = text.slice(c.pos, c.end);
      const m = /^\/\/( *)(.*)$/.exec(body);
      const pad = m[1] === '' ? ' ' : m[1];
      const content = m[2].trimEnd();
      const prefix = indentOf(l) + '//' + pad;
      const tab = looksTabular(content);
      let reason = null;
      if (DIRECTIVE.test(body)) reason = 'tool directive comment';
      else if (tab) reason = `comment: ${tab}`;
      else if (pad.length - 1 >= 4) reason = 'comment: indented (code example)';
      return {
        line: l,
        full: lineText(l),
        prefix,
        cont: prefix,
        content,
        suffix: '',
        editable: reason === null,
        reason,
        jsdoc: false,
        target: reason === null && content !== '' && !startsBlock(content),
      };
    });
    const r = rewrap(items, '');
    if (r === null) return;
    const first = lineOf(run[0].pos);
    edits.push({
      start: starts[first],
      end: run[run.length - 1].end,
      text: r.out.join('\n'),
      line: first,
      lines: r.broken,
      what: 'comment',
    });
  }

  function trailingComment(c, body, l) {
    if (colOf(c.end) <= W) return; // the line is long for another reason
    if (DIRECTIVE.test(body)) return why(l, 'tool directive comment');
    const m = /^\/\/( *)(.*)$/.exec(body);
    const pad = m[1] === '' ? ' ' : m[1];
    const content = m[2].trimEnd();
    // To its own line(s) above the code, which must not start inside a literal or a comment.
    const indent = indentOf(l);
    if (insideToken(starts[l]) || insideToken(starts[l] + indent.length))
      return why(l, 'trailing comment on a line inside a multi-line literal');
    const prefix = indent + '//' + pad;
    const hang = hangingIndent(content);
    const lines = wrapWords(content, W - width(prefix), W - width(prefix) - hang.length);
    const out = lines.map((x, i) => prefix + (i > 0 ? hang : '') + x);
    let cut = c.pos;
    while (cut > starts[l] && /[ \t]/.test(text[cut - 1])) cut--;
    edits.push({ start: cut, end: c.end, text: '', line: l, what: 'trailing comment' });
    edits.push({
      start: starts[l],
      end: starts[l],
      text: out.join('\n') + '\n',
      line: l,
      what: 'trailing comment',
    });
  }

  function unbreakableWord(content, where) {
    const longest = words(content).sort((a, b) => width(b) - width(a))[0] ?? '';
    if (/https?:\/\//.test(longest)) return `${where}: URL longer than the room on the line`;
    if (/^@\w+ \{|^\{/.test(longest))
      return `${where}: JSDoc type longer than the room on the line`;
    return `${where}: one word longer than the room on the line (${longest.slice(0, 40)})`;
  }

  function oneLineBlock(c, body, l) {
    const before = text.slice(starts[l], c.pos);
    const after = lineText(l).slice(c.end - starts[l]);
    if (before.trim() !== '' || after.trim() !== '')
      return why(l, 'block comment inside a line of code', 1);
    const jsdoc = body.startsWith('/**') && !body.startsWith('/**/');
    const inner = body.slice(jsdoc ? 3 : 2, -2).trim();
    if (/^[@#]__|^@vite-ignore|^#__PURE__/.test(inner)) return why(l, 'tool directive comment');
    const prefix = before + ' * ';
    const lines = [];
    for (const s of jsdoc ? tagSegments(inner) : [inner]) {
      const hang = hangingIndent(s);
      const wrapped = wrapWords(s, W - width(prefix), W - width(prefix) - hang.length);
      wrapped.forEach((x, i) => lines.push(prefix + (i > 0 ? hang : '') + x));
    }
    if (lines.length === 1 && width(lines[0]) > W) return why(l, unbreakableWord(inner, 'comment'));
    const out = [before + (jsdoc ? '/**' : '/*'), ...lines, before + ' */'];
    edits.push({ start: starts[l], end: c.end, text: out.join('\n'), line: l, what: 'jsdoc' });
  }

  function multiLineBlock(c, body, l0) {
    const parts = body.split('\n');
    const baseIndent = indentOf(l0);
    const jsdoc = body.startsWith('/**');
    const afterCode = text.slice(starts[l0], c.pos).trim() !== '';
    const lLast = l0 + parts.length - 1;
    const tail = lineText(lLast).slice(c.end - starts[lLast]);
    let fence = false;
    let example = false;
    const items = parts.map((part, i) => {
      const l = l0 + i;
      const full = i === parts.length - 1 ? lineText(l).slice(0, c.end - starts[l]) : lineText(l);
      const item = {
        line: l,
        full,
        suffix: '',
        editable: true,
        reason: null,
        jsdoc,
        target: false,
      };
      const stripped = part.replace(/^\s*\*?\s?/, '');
      if (/^(```|~~~)/.test(stripped.trim())) fence = !fence;
      if (/^@/.test(stripped.trim())) example = /^@example\b/.test(stripped.trim());
      const no = (reason) => Object.assign(item, { editable: false, reason });
      if (afterCode) return no('block comment after code on the line');
      if (fence || /^(```|~~~)/.test(stripped.trim())) return no('comment: fenced code block');
      if (example) return no('comment: inside an @example');
      let m;
      if (i === 0) {
        m = /^(\s*\/\*\*?)( *)(.*)$/.exec(full);
        item.prefix = m[1] + (m[2] || ' ');
        item.content = m[3];
        item.cont = baseIndent + ' * ';
      } else {
        m = /^(\s*\*(?!\/))( *)(.*)$/.exec(full) ?? /^(\s*)()(.*)$/.exec(full);
        const pad = m[2] || (m[1].endsWith('*') ? ' ' : '');
        if (pad.length - 1 >= 4) return no('comment: indented (code example)');
        item.prefix = m[1] + pad;
        item.content = m[3];
        item.cont = item.prefix;
      }
      if (i === parts.length - 1) {
        if (tail.trim() !== '') return no('block comment followed by code on the line');
        const k = item.content.lastIndexOf('*/');
        item.content = item.content.slice(0, k).trimEnd();
        item.suffix = item.content === '' ? '*/' : ' */';
      }
      item.content = item.content.trimEnd();
      const tab = looksTabular(item.content);
      if (tab) return no(`comment: ${tab}`);
      item.target = i > 0 && item.content !== '' && !startsBlock(item.content);
      return item;
    });
    const r = rewrap(items, baseIndent + ' */');
    if (r === null) return;
    edits.push({
      start: starts[l0],
      end: c.end,
      text: r.out.join('\n'),
      line: l0,
      lines: r.broken,
      what: 'block comment',
    });
  }

  // -------------------------------------------------------------------------------------------
  function planLiterals() {
    const visit = (node) => {
      if (
        ts.isStringLiteral(node) ||
        ts.isNoSubstitutionTemplateLiteral(node) ||
        ts.isTemplateExpression(node)
      ) {
        literal(node);
        if (ts.isTemplateExpression(node)) node.templateSpans.forEach((s) => visit(s.expression));
        return;
      }
      ts.forEachChild(node, visit);
    };
    visit(sf);
  }

  /** Why a literal must stay one literal here, or null. */
  function keepWhole(node) {
    const p = node.parent;
    if (p.name === node) return 'property or declaration name';
    if (ts.isImportDeclaration(p) || ts.isExportDeclaration(p) || ts.isExternalModuleReference(p))
      return 'module specifier';
    if (ts.isImportAttribute?.(p) || ts.isModuleDeclaration(p)) return 'module specifier';
    if (ts.isLiteralTypeNode(p)) return 'literal type';
    if (ts.isCaseClause(p)) return 'case label';
    if (ts.isElementAccessExpression(p) && p.argumentExpression === node)
      return 'element access key';
    if (ts.isExpressionStatement(p)) return 'directive or expression statement';
    if (ts.isTaggedTemplateExpression(p)) return 'tagged template';
    if (
      ts.isCallExpression(p) &&
      (p.expression.kind === ts.SyntaxKind.ImportKeyword ||
        (ts.isIdentifier(p.expression) && p.expression.text === 'require'))
    )
      return 'module specifier';
    // Prettier never breaks inside ${...}: a concatenation there would stay on the line.
    for (let a = p; a && !ts.isSourceFile(a); a = a.parent)
      if (ts.isTemplateSpan(a)) return 'inside ${...} of a template';
    for (let a = p; a && !ts.isSourceFile(a); a = a.parent) {
      if (ts.isTypeNode(a) && !ts.isExpressionWithTypeArguments(a)) return 'inside a type';
      if (ts.isExpressionWithTypeArguments(a)) return 'inside a heritage clause';
      if (ts.isDecorator(a)) return 'decorator';
      if (
        (ts.isAsExpression(a) || ts.isSatisfiesExpression(a)) &&
        /^const$/.test(a.type.getText(sf))
      )
        return '`as const`';
      if (ts.isComputedPropertyName(a)) return 'computed property name';
      if (ts.isEnumMember(a)) return 'enum member';
      if (ts.isStatement(a) || ts.isFunctionLike(a) || ts.isClassLike(a)) break;
    }
    return null;
  }

  function isTestTitle(node) {
    const p = node.parent;
    if (!ts.isCallExpression(p) || p.arguments[0] !== node) return false;
    let callee = p.expression;
    while (ts.isCallExpression(callee) || ts.isPropertyAccessExpression(callee))
      callee = callee.expression;
    return ts.isIdentifier(callee) && /^(describe|it|test|suite|bench)$/.test(callee.text);
  }

  /** A string literal, an untagged template, or a `+` of such (in parentheses or not). */
  function literalChain(n) {
    if (ts.isParenthesizedExpression(n)) return literalChain(n.expression);
    if (ts.isStringLiteral(n) || ts.isNoSubstitutionTemplateLiteral(n)) return true;
    if (ts.isTemplateExpression(n)) return true;
    return (
      ts.isBinaryExpression(n) &&
      n.operatorToken.kind === ts.SyntaxKind.PlusToken &&
      literalChain(n.left) &&
      literalChain(n.right)
    );
  }

  /** Whether the replacement `a + b` needs parentheses where the literal stands. */
  function needsParens(node, template) {
    const p = node.parent;
    if (ts.isParenthesizedExpression(p)) return false;
    if ((ts.isCallExpression(p) || ts.isNewExpression(p)) && p.expression !== node) return false;
    if (ts.isArrayLiteralExpression(p) || ts.isSpreadElement(p)) return false;
    if (ts.isPropertyAssignment(p) || ts.isVariableDeclaration(p) || ts.isPropertyDeclaration(p))
      return false;
    if (ts.isParameter(p) || ts.isBindingElement(p)) return false;
    if (ts.isReturnStatement(p) || ts.isThrowStatement(p) || ts.isArrowFunction(p)) return false;
    if (ts.isExportAssignment(p)) return false;
    if (ts.isConditionalExpression(p)) return false;
    if (ts.isBinaryExpression(p)) {
      const op = p.operatorToken.kind;
      if (op === ts.SyntaxKind.PlusToken) {
        if (p.left === node) return false;
        // x + 'a' + 'b' is (x + 'a') + 'b': the same string; with ${} in the pieces only when x
        // is itself made of literals (else x would be converted after the ${} are evaluated).
        return template && !literalChain(p.left);
      }
      const low = [
        ts.SyntaxKind.CommaToken,
        ts.SyntaxKind.EqualsToken,
        ts.SyntaxKind.PlusEqualsToken,
        ts.SyntaxKind.BarBarToken,
        ts.SyntaxKind.AmpersandAmpersandToken,
        ts.SyntaxKind.QuestionQuestionToken,
        ts.SyntaxKind.BarBarEqualsToken,
        ts.SyntaxKind.AmpersandAmpersandEqualsToken,
        ts.SyntaxKind.QuestionQuestionEqualsToken,
        ts.SyntaxKind.EqualsEqualsEqualsToken,
        ts.SyntaxKind.ExclamationEqualsEqualsToken,
        ts.SyntaxKind.EqualsEqualsToken,
        ts.SyntaxKind.ExclamationEqualsToken,
      ];
      return !low.includes(op);
    }
    return true;
  }

  function literal(node) {
    const start = node.getStart(sf);
    const l = lineOf(start);
    const lEnd = lineOf(node.end);
    const isTemplate = !ts.isStringLiteral(node);
    if (l !== lEnd) {
      const textSpansLines = ts.isTemplateExpression(node)
        ? [node.head, ...node.templateSpans.map((s) => s.literal)].some((t) =>
            /\n/.test(text.slice(t.getStart(sf), t.end)),
          )
        : true;
      for (let x = l; x <= lEnd; x++)
        if (long.has(x))
          why(
            x,
            textSpansLines
              ? `${isTemplate ? 'template literal' : 'string'}: text of several lines`
              : 'template literal: its ${...} code is laid out over several lines',
          );
      return;
    }
    if (!long.has(l)) return;
    // Responsible for the overflow: it crosses the width, or only closing punctuation follows it.
    const rest = lineText(l).slice(node.end - starts[l]);
    const title = isTestTitle(node);
    if (!(colOf(node.end) > W || /^[\s,;:)\]}+?&|]*$/.test(rest) || title)) return;
    const kind = isTemplate ? 'template literal' : 'string literal';
    const keep = keepWhole(node) ?? (title && !opts.splitTestTitles ? 'test title' : null);
    if (keep) return why(l, `${kind}: ${keep}`, keep.startsWith('inside ${') ? 1 : 0);
    // Text regions (source offsets) where a split may go, and the split points in them.
    const regions = [];
    if (ts.isTemplateExpression(node)) {
      regions.push([start + 1, node.head.end - 2]);
      for (const s of node.templateSpans) {
        const ls = s.literal.getStart(sf) + 1;
        regions.push([ls, s.literal.end - (ts.isTemplateTail(s.literal) ? 1 : 2)]);
      }
    } else regions.push([start + 1, node.end - 1]);
    const points = [];
    for (const [a, b] of regions) {
      for (let i = a; i < b; i++) {
        const ch = text[i];
        if (ch === '\\') {
          if (text[i + 1] === 'n' && i + 2 <= b) points.push({ at: i + 2, nl: true });
          i++;
          continue;
        }
        if (ch === ' ' && text[i + 1] !== ' ' && i + 1 <= b) {
          // Weak: right after a ${...} or a number, where a unit usually follows ("${n} s"), and
          // on either side of an operator ("a = b").
          const word = text.slice(a, i).split(' ').pop();
          const next = text.slice(i + 1, b).split(' ')[0];
          const op = /^([-+*/=<>]|==|->|<-|=>|<=|>=)$/;
          const weak = (i === a && a > start + 1) || /^[\d.,]+$/.test(word) || op.test(word);
          if (op.test(next) && !weak) {
            points.push({ at: i + 1, nl: false, weak: true });
            continue;
          }
          points.push({ at: i + 1, nl: false, weak });
        }
      }
    }
    const contentStart = start + 1;
    const contentEnd = node.end - 1;
    // Not at an end, and no piece starting with punctuation ("0.01 %" stays together).
    const points2 = points.filter(
      (p) => p.at > contentStart && p.at < contentEnd && !/[%)\]},.;:!?]/.test(text[p.at]),
    );
    if (points2.length === 0) {
      const body = regions.map(([x, y]) => text.slice(x, y)).join('');
      if (ts.isTemplateExpression(node))
        return why(
          l,
          `${kind}: its \${...} code is longer than the room (prettier keeps it whole)`,
        );
      if (/https?:\/\//.test(body) && !/ /.test(body)) return why(l, `${kind}: URL`);
      if (!/ |\\n/.test(body)) return why(l, `${kind}: no space to split at (a path or a name)`);
      return why(l, `${kind}: no split point between its ends`);
    }
    const indent = indentOf(l).length;
    const col = colOf(start);
    // Prettier puts the pieces of a new concatenation on lines of their own; a piece of an
    // existing one stays where it is.
    const inChain =
      ts.isBinaryExpression(node.parent) &&
      node.parent.operatorToken.kind === ts.SyntaxKind.PlusToken;
    const base = inChain ? col : Math.min(col, indent + 4);
    const max = Math.max(24, W - base - 4 - 3); // piece including its quotes
    const q = isTemplate ? '`' : text[start];
    // Greedy cuts for pieces of at most `lim`: the last split point that fits, but a strong one
    // rather than a weak one if that still fills 60 %, and a \n in the second half before both.
    const greedy = (lim) => {
      const out = [];
      let from = contentStart;
      while (contentEnd - from + 2 > lim) {
        const fit = points2.filter((p) => p.at > from && p.at - from + 2 <= lim);
        let pick;
        if (fit.length > 0) {
          pick = fit[fit.length - 1];
          const strong = fit.filter((p) => !p.weak && p.at - from + 2 >= lim * 0.6);
          if (pick.weak && strong.length > 0) pick = strong[strong.length - 1];
          const nl = fit.filter((p) => p.nl && p.at - from + 2 >= lim / 2);
          if (nl.length > 0) pick = nl[nl.length - 1];
        } else pick = points2.find((p) => p.at > from);
        if (!pick) break;
        out.push(pick.at);
        from = pick.at;
      }
      return out;
    };
    // As many pieces as the greedy cut needs, but even: of the limits that give no more pieces,
    // the one with the fewest weak cuts, then the least difference between the longest and the
    // shortest piece (so no short last piece).
    let cuts = greedy(max);
    if (cuts.length > 0) {
      const weakAt = new Set(points2.filter((p) => p.weak).map((p) => p.at));
      let best = null;
      for (
        let lim = Math.ceil((contentEnd - contentStart) / (cuts.length + 1));
        lim <= max;
        lim++
      ) {
        const c = greedy(lim);
        if (c.length > cuts.length) continue;
        const b = [contentStart, ...c, contentEnd];
        const lens = b.slice(1).map((x, i) => x - b[i]);
        const cost =
          c.filter((x) => weakAt.has(x)).length * 1000 + Math.max(...lens) - Math.min(...lens);
        if (best === null || cost < best.cost) best = { cost, c };
      }
      if (best) cuts = best.c;
    }
    if (cuts.length === 0) return why(l, `${kind}: no split point that helps`, 1);
    const bounds = [contentStart, ...cuts, contentEnd];
    const pieces = [];
    for (let i = 0; i + 1 < bounds.length; i++)
      pieces.push(q + text.slice(bounds[i], bounds[i + 1]) + q);
    const hasSubst = pieces.map(
      (p) => isTemplate && /\$\{/.test(p) && ts.isTemplateExpression(node),
    );
    let repl = pieces.join(' + ');
    if (needsParens(node, hasSubst.some(Boolean))) repl = '(' + repl + ')';
    edits.push({ start, end: node.end, text: repl, line: l, what: kind });
  }
}

/** Applies non-overlapping edits (later ones first). */
function applyEdits(text, edits) {
  const sorted = [...edits].sort((a, b) => b.start - a.start || b.end - a.end);
  let out = text;
  let limit = Infinity;
  for (const e of sorted) {
    if (e.end > limit) continue; // overlaps one applied already: the next round takes it
    out = out.slice(0, e.start) + e.text + out.slice(e.end);
    limit = e.start;
  }
  return out;
}

// ---------------------------------------------------------------------------------------------
// Equivalence: syntax trees with comments gone and literal concatenations folded

const SKIP_PROPS = new Set([
  'pos',
  'end',
  'kind',
  'flags',
  'parent',
  'original',
  'symbol',
  'localSymbol',
  'jsDoc',
  'jsDocCache',
  'emitNode',
  'id',
  'modifierFlagsCache',
  'transformFlags',
  'flowNode',
  'endFlowNode',
  'returnFlowNode',
  'locals',
  'nextContainer',
  'text',
  'rawText',
  'escapedText',
  'singleQuote',
  'hasExtendedUnicodeEscape',
  'templateFlags',
  'isUnterminated',
  'numericLiteralFlags',
  'hasTrailingComma',
  'identifierFlags',
  'nodeCount',
  'identifierCount',
  'symbolCount',
  'multiLine', // layout: whether an object, array or block literal spans lines
]);
// Parser flags that carry meaning (let/const/using, namespace forms, optional chains).
const MEANINGFUL_FLAGS =
  ts.NodeFlags.BlockScoped |
  ts.NodeFlags.NestedNamespace |
  ts.NodeFlags.Namespace |
  ts.NodeFlags.OptionalChain |
  ts.NodeFlags.GlobalAugmentation |
  ts.NodeFlags.ThisNodeHasError;

/**
 * A canonical form of a file's syntax tree: no positions, no comments, no parentheses (the tree
 * shape already says how operands group), string-valued literals as {s: cooked texts, e: exprs},
 * and `A + B` folded when both are such literals, or `(x + A) + B` when B has no ${}.
 */
export function canonical(file, text) {
  const sf = parse(file, text);
  const stats = { nodes: 0, leaves: 0, errors: sf.parseDiagnostics?.length ?? 0 };
  const isStr = (v) => v !== null && typeof v === 'object' && !Array.isArray(v) && 's' in v;
  const merge = (a, b) => ({
    s: [...a.s.slice(0, -1), a.s[a.s.length - 1] + b.s[0], ...b.s.slice(1)],
    e: [...a.e, ...b.e],
  });
  const jsdoc = [];
  const squash = (t) =>
    t
      ? t
          .getText(sf)
          .replace(/\n\s*\*/g, ' ')
          .replace(/\s+/g, '')
      : '';
  const norm = (node) => {
    stats.nodes++;
    if (node.jsDoc?.length)
      jsdoc.push([
        node.kind,
        node.name && ts.isIdentifier(node.name) ? node.name.text : '',
        ...node.jsDoc.map((d) =>
          (d.tags ?? []).map((t) => [
            t.kind,
            t.tagName.text,
            squash(t.typeExpression),
            squash(t.name),
            t.isBracketed ?? '',
          ]),
        ),
      ]);
    if (ts.isParenthesizedExpression(node)) return norm(node.expression);
    if (ts.isStringLiteral(node) || ts.isNoSubstitutionTemplateLiteral(node)) {
      stats.leaves++;
      if (ts.isTaggedTemplateExpression(node.parent))
        return ['raw', node.rawText ?? node.text, node.text];
      return { s: [node.text], e: [] };
    }
    if (ts.isTemplateExpression(node)) {
      stats.leaves += 1 + node.templateSpans.length;
      if (ts.isTaggedTemplateExpression(node.parent))
        return [
          'rawtpl',
          node.head.rawText,
          ...node.templateSpans.flatMap((s) => [norm(s.expression), s.literal.rawText]),
        ];
      return {
        s: [node.head.text, ...node.templateSpans.map((s) => s.literal.text)],
        e: node.templateSpans.map((s) => norm(s.expression)),
      };
    }
    if (ts.isBinaryExpression(node) && node.operatorToken.kind === ts.SyntaxKind.PlusToken) {
      const a = norm(node.left);
      const b = norm(node.right);
      stats.leaves++;
      if (isStr(a) && isStr(b)) return merge(a, b);
      if (Array.isArray(a) && a[0] === 'plus' && isStr(a[2]) && isStr(b) && b.e.length === 0)
        return ['plus', a[1], merge(a[2], b)];
      return ['plus', a, b];
    }
    if (ts.isIdentifier(node) || ts.isPrivateIdentifier(node)) {
      stats.leaves++;
      return ['id', node.text];
    }
    if (
      ts.isNumericLiteral(node) ||
      ts.isBigIntLiteral(node) ||
      ts.isRegularExpressionLiteral(node)
    ) {
      stats.leaves++;
      return ['lit', node.kind, node.text];
    }
    if (ts.isJsxText?.(node)) return ['jsxtext', node.text];
    const out = [node.kind];
    const fl = node.flags & MEANINGFUL_FLAGS;
    if (fl) out.push(['flags', fl]);
    for (const key of Object.keys(node)) {
      if (SKIP_PROPS.has(key)) continue;
      const v = node[key];
      if (typeof v === 'number' || typeof v === 'boolean' || typeof v === 'string')
        out.push([key, v]);
    }
    let kids = 0;
    ts.forEachChild(
      node,
      (child) => {
        kids++;
        out.push(norm(child));
      },
      (arr) => {
        kids++;
        out.push(['list', ...arr.map(norm)]);
      },
    );
    if (kids === 0) stats.leaves++;
    return out;
  };
  const tree = norm(sf);
  return {
    json: JSON.stringify(tree),
    jsdoc: JSON.stringify(jsdoc),
    comments: commentWords(sf),
    stats,
  };
}

/** The JavaScript TypeScript emits for a file, without comments. */
function emitted(file, text) {
  const cfg = ts.readConfigFile(join(ROOT, 'tsconfig.json'), ts.sys.readFile).config ?? {};
  const options = ts.convertCompilerOptionsFromJson(cfg.compilerOptions ?? {}, ROOT).options;
  const out = ts.transpileModule(text, {
    fileName: file,
    compilerOptions: {
      ...options,
      module: ts.ModuleKind.ESNext, // the package is "type": "module"
      removeComments: true,
      sourceMap: false,
      inlineSourceMap: false,
    },
    reportDiagnostics: false,
  });
  return out.outputText;
}

function verify(ref, files) {
  const added = execFileSync(
    'git',
    ['diff', '--name-only', '--diff-filter=A', ref, '--', ...FOLDERS],
    {
      cwd: ROOT,
      encoding: 'utf8',
    },
  )
    .split('\n')
    .filter(Boolean);
  if (added.length > 0) console.log(`new since ${ref}, nothing to compare: ${added.join(', ')}`);
  const changed = execFileSync(
    'git',
    ['diff', '--name-only', '--diff-filter=M', ref, '--', ...FOLDERS],
    {
      cwd: ROOT,
      encoding: 'utf8',
    },
  )
    .split('\n')
    .filter((f) => EXTENSIONS.test(f) && (files.length === 0 || files.includes(f)));
  let bad = 0;
  const totals = {
    files: 0,
    lines: 0,
    nodes: 0,
    leaves: 0,
    jsNodes: 0,
    jsLeaves: 0,
    commentWords: 0,
    jsdoc: 0,
  };
  for (const f of changed) {
    if (!existsSync(join(ROOT, f))) continue;
    const before = execFileSync('git', ['show', `${ref}:${f}`], { cwd: ROOT, encoding: 'utf8' });
    const after = readFileSync(join(ROOT, f), 'utf8');
    const a = canonical(f, before);
    const b = canonical(f, after);
    const ja = canonical(f.replace(/\.(ts|mts|cts)$/, '.js'), emitted(f, before));
    const jb = canonical(f.replace(/\.(ts|mts|cts)$/, '.js'), emitted(f, after));
    totals.files++;
    totals.lines += after.split('\n').length;
    totals.nodes += b.stats.nodes;
    totals.leaves += b.stats.leaves;
    totals.jsNodes += jb.stats.nodes;
    totals.jsLeaves += jb.stats.leaves;
    const problems = [];
    if (b.stats.errors > 0) problems.push(`${b.stats.errors} syntax error(s) after`);
    if (a.json !== b.json) problems.push('source syntax tree differs');
    if (ja.json !== jb.json) problems.push('emitted JavaScript differs');
    if (a.jsdoc !== b.jsdoc) problems.push('JSDoc tags differ');
    if (a.comments.join(' ') !== b.comments.join(' ')) problems.push('comment words differ');
    totals.commentWords += b.comments.length;
    totals.jsdoc += JSON.parse(b.jsdoc).length;
    if (problems.length > 0) {
      bad++;
      console.log(`DIFFERS ${f}: ${problems.join('; ')}`);
    }
  }
  console.log(
    `verify against ${ref}: ${totals.files} changed files, ${totals.lines} lines; ` +
      `source trees: ${totals.nodes} nodes (${totals.leaves} leaf tokens); ` +
      `emitted JavaScript: ${totals.jsNodes} nodes (${totals.jsLeaves} leaf tokens); ` +
      `${totals.jsdoc} JSDoc blocks' tags; ${totals.commentWords} comment words; ` +
      `${totals.files - bad} equal, ${bad} differ`,
  );
  return bad === 0 ? 0 : 1;
}

// ---------------------------------------------------------------------------------------------
// Main

/**
 * One file through the codemod and prettier until nothing changes. Refuses (throws) when the result
 * does not parse or its canonical syntax tree, JSDoc tags or comment words differ from the input's.
 */
export async function rewriteText(file, text, opts = {}) {
  const o = { width: 100, splitTestTitles: false, ...opts };
  const prettier = await import('prettier');
  const abs = join(ROOT, file);
  const config = (await prettier.resolveConfig(abs)) ?? {};
  let out = text;
  for (let round = 0; round < 8; round++) {
    const { edits } = plan(file, out, o);
    if (edits.length === 0) break;
    const next = applyEdits(out, edits);
    const errors = parse(file, next).parseDiagnostics?.length ?? 0;
    if (errors > 0) throw new Error(`${file}: the edits of round ${round + 1} do not parse`);
    out = await prettier.format(next, { ...config, filepath: abs });
  }
  if (out !== text) {
    const a = canonical(file, text);
    const b = canonical(file, out);
    if (a.json !== b.json || a.jsdoc !== b.jsdoc || a.comments.join(' ') !== b.comments.join(' '))
      throw new Error(
        `${file}: the rewritten file is not equivalent to the original; left as it was`,
      );
  }
  return out;
}

async function rewrite(files, opts) {
  let changedFiles = 0;
  for (const f of files) {
    const abs = join(ROOT, f);
    const original = readFileSync(abs, 'utf8');
    const text = await rewriteText(f, original, opts);
    if (text !== original) {
      writeFileSync(abs, text);
      changedFiles++;
      if (opts.verbose) console.log(`rewrote ${f}`);
    }
  }
  console.log(`wrap-long-lines: ${changedFiles} of ${files.length} files rewritten`);
}

function check(files, opts) {
  let breakable = 0;
  let kept = 0;
  const byReason = new Map();
  for (const f of files) {
    const text = readFileSync(join(ROOT, f), 'utf8');
    const { edits, long } = plan(f, text, opts);
    const editLines = new Map();
    for (const e of edits) for (const l of e.lines ?? [e.line]) editLines.set(l, e.what);
    for (const [l, reasons] of [...long].sort((a, b) => a[0] - b[0])) {
      if (editLines.has(l)) {
        breakable++;
        console.log(
          `${f}:${l + 1}: can be broken (${editLines.get(l)}): run node ` +
            `scripts/wrap-long-lines.mjs`,
        );
        continue;
      }
      const rank = Math.min(...reasons.map((r) => r.rank));
      const reason =
        reasons.length > 0
          ? [...new Set(reasons.filter((r) => r.rank === rank).map((r) => r.reason))].join('; ')
          : 'code prettier keeps on one line';
      kept++;
      byReason.set(
        reason.replace(/ \(.*\)$/, ''),
        (byReason.get(reason.replace(/ \(.*\)$/, '')) ?? 0) + 1,
      );
      if (opts.verbose) console.log(`${f}:${l + 1}: kept: ${reason}`);
    }
  }
  if (!opts.verbose && kept > 0) console.log(`(--verbose lists the ${kept} kept lines)`);
  console.log(
    `line width ${opts.width}: ${breakable} line(s) can be broken, ${kept} cannot (allowed): ` +
      [...byReason]
        .sort((a, b) => b[1] - a[1])
        .map(([r, n]) => `${n} ${r}`)
        .join(', '),
  );
  return breakable === 0 ? 0 : 1;
}

async function main(argv) {
  const opts = { width: 100, splitTestTitles: false, verbose: false };
  let mode = 'write';
  let ref = null;
  const files = [];
  for (let i = 0; i < argv.length; i++) {
    const a = argv[i];
    if (a === '--check') mode = 'check';
    else if (a === '--verify') {
      mode = 'verify';
      ref = argv[++i];
    } else if (a === '--width') opts.width = Number(argv[++i]);
    else if (a === '--split-test-titles') opts.splitTestTitles = true;
    else if (a === '--verbose') opts.verbose = true;
    else if (a.startsWith('--')) throw new Error(`unknown option ${a}`);
    else files.push(relative(ROOT, resolve(a)).split(sep).join('/'));
  }
  const all = sourceFiles();
  const chosen = files.length > 0 ? all.filter((f) => files.includes(f)) : all;
  if (mode === 'verify') return verify(ref, files);
  if (mode === 'check') return check(chosen, opts);
  await rewrite(chosen, opts);
  return 0;
}

if (process.argv[1] && resolve(process.argv[1]) === fileURLToPath(import.meta.url)) {
  main(process.argv.slice(2)).then(
    (code) => process.exit(code),
    (e) => {
      console.error(e instanceof Error ? e.message : e);
      process.exit(2);
    },
  );
}
