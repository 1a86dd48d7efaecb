// Types for scripts/wrap-long-lines.mjs, which test/wrap-long-lines.test.ts imports.
export interface WrapOptions {
  readonly width?: number;
  readonly splitTestTitles?: boolean;
}
export interface Canonical {
  /** The syntax tree without positions, comments or parentheses, literal concatenations folded. */
  readonly json: string;
  /** The JSDoc tags of every node that has JSDoc, in order. */
  readonly jsdoc: string;
  /** The words of all comments, in order. */
  readonly comments: string[];
  readonly stats: { readonly nodes: number; readonly leaves: number; readonly errors: number };
}
export function sourceFiles(): string[];
export function canonical(file: string, text: string): Canonical;
export function rewriteText(file: string, text: string, opts?: WrapOptions): Promise<string>;
