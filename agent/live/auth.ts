import { createHash, timingSafeEqual } from 'node:crypto';
import type { LiveConfig } from '../config/live.js';
import { UserError } from '../errors.js';
import { resolveSecret, type Secret } from '../mqtt/secrets.js';

/**
 * Who may use the live page. Every request and every WebSocket carries a token; the token decides
 * the role. Tokens are compared as SHA-256 digests with timingSafeEqual against EVERY configured
 * token (no early exit), so the time taken says nothing about which token, or how much of one,
 * matched.
 */

export type LiveRole = 'viewer' | 'operator';

/** The holder of a token, as logs and job records name it. Never carries the token itself. */
export interface Principal {
  readonly name: string;
  readonly role: LiveRole;
}

export interface LiveToken extends Principal {
  readonly secret: Secret;
}

/**
 * Shortest token accepted, characters: a token is typed once and kept; it must not be guessable.
 */
export const MIN_TOKEN_CHARS = 16;
/** Longest token looked at; anything longer is refused without hashing it. */
const MAX_TOKEN_CHARS = 512;

function digest(b: Buffer | string): Buffer {
  return createHash('sha256').update(b).digest();
}

export class TokenCheck {
  private readonly entries: ReadonlyArray<{
    readonly principal: Principal;
    readonly digest: Buffer;
  }>;

  constructor(tokens: readonly LiveToken[]) {
    if (tokens.length === 0) throw new Error('TokenCheck needs at least one token');
    this.entries = tokens.map((t) => ({
      principal: { name: t.name, role: t.role },
      digest: digest(t.secret.reveal()),
    }));
  }

  /** The principal a token belongs to, or null. */
  identify(token: unknown): Principal | null {
    if (typeof token !== 'string' || token.length === 0 || token.length > MAX_TOKEN_CHARS)
      return null;
    const d = digest(token);
    let found: Principal | null = null;
    for (const e of this.entries) {
      if (timingSafeEqual(d, e.digest) && found === null) found = e.principal;
    }
    return found;
  }
}

/** The token of an `Authorization: Bearer ...` header, or null. */
export function bearerToken(header: string | undefined): string | null {
  if (!header) return null;
  const m = /^Bearer\s+(\S+)\s*$/i.exec(header);
  return m ? m[1]! : null;
}

export function mayAct(p: Principal): boolean {
  return p.role === 'operator';
}

/**
 * Reads every configured token (file or environment variable), refusing short tokens and the same
 * token under two names (its role would be ambiguous). UserError names the config path.
 */
export function resolveLiveTokens(
  cfg: LiveConfig,
  env: NodeJS.ProcessEnv = process.env,
): LiveToken[] {
  const out: LiveToken[] = [];
  const seen = new Map<string, string>();
  cfg.tokens.forEach((t, i) => {
    const where = `live.tokens[${i}]`;
    const secret = resolveSecret(t, where, env);
    const value = secret.reveal().toString('utf8');
    if (value.length < MIN_TOKEN_CHARS) {
      throw new UserError(
        where,
        `the token of "${t.name}" has ${value.length} characters; ` +
          `at least ${MIN_TOKEN_CHARS} are needed`,
        'make a random one with `turnwise live make-token FILE`',
      );
    }
    const key = digest(value).toString('hex');
    const other = seen.get(key);
    if (other !== undefined)
      throw new UserError(
        where,
        `"${t.name}" has the same token as "${other}"`,
        'give every name its own token, so the role of each is clear',
      );
    seen.set(key, t.name);
    out.push({ name: t.name, role: t.role, secret });
  });
  return out;
}
