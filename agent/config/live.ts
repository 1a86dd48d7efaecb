import { z } from 'zod';

/**
 * `live:` section: the technician's page (live 1x vectors and the balancing workbench), served by
 * the agent over HTTP and WebSocket. Optional: without it no port is opened. Tokens never sit in
 * this file; each entry names a file (mode 600) or an environment variable that holds one.
 */

const envName = z
  .string()
  .regex(/^[A-Za-z_][A-Za-z0-9_]*$/, 'an environment variable name (letters, digits, "_")');

export const liveTokenSchema = z
  .object({
    name: z
      .string()
      .regex(
        /^[A-Za-z0-9][A-Za-z0-9_.-]{0,31}$/,
        'letters, digits, "_", "." or "-", at most 32 characters',
      )
      .describe(
        'Who holds this token (e.g. control-room, balancing-crew); ' +
          'written in the logs and job records, never the token itself.',
      ),
    role: z
      .enum(['viewer', 'operator'])
      .describe('viewer: sees the live page and job records; operator: also runs balancing jobs.'),
    file: z.string().min(1).optional().describe('File holding the token on one line (mode 600).'),
    env: envName.optional().describe('Environment variable holding the token.'),
  })
  .strict()
  .superRefine((t, ctx) => {
    if (!!t.file === !!t.env)
      ctx.addIssue({ code: 'custom', message: 'give exactly one of file or env' });
  });

export const liveSchema = z
  .object({
    bind: z
      .string()
      .min(1)
      .default('127.0.0.1')
      .describe(
        'Address to listen on: 127.0.0.1 (this board only), ' +
          "the board's LAN address, or 0.0.0.0 (every interface).",
      ),
    port: z
      .number()
      .int()
      .min(0)
      .max(65535)
      .default(8480)
      .describe('TCP port of the page (0: any free port, for tests).'),
    tokens: z
      .array(liveTokenSchema)
      .min(1, 'needs at least one token: viewing and acting both need one')
      .describe('Access tokens, each with a role. Make one with `turnwise live make-token FILE`.'),
    tls: z
      .object({
        cert_file: z.string().min(1).describe('PEM certificate (chain) of the page.'),
        key_file: z.string().min(1).describe('PEM private key (mode 600).'),
      })
      .strict()
      .optional()
      .describe(
        'Serve over HTTPS/WSS. Without it tokens cross the ' +
          'network in clear: bind to 127.0.0.1 or a trusted segment.',
      ),
    update_hz: z
      .number()
      .min(1)
      .max(10)
      .default(2)
      .describe('Most live updates sent to each page per second.'),
    trail_points: z
      .number()
      .int()
      .min(0)
      .max(200)
      .default(20)
      .describe('Earlier 1x vectors drawn behind the current one on each polar plot.'),
    trend_max_points: z
      .number()
      .int()
      .min(10)
      .max(100000)
      .default(4000)
      .describe(
        'Trend points kept for the session (one per analysis window); the oldest go first.',
      ),
    capture: z
      .object({
        revolutions: z
          .number()
          .int()
          .min(10)
          .max(100000)
          .default(100)
          .describe('Revolutions averaged into one balancing run.'),
        settle_revolutions: z
          .number()
          .int()
          .min(0)
          .max(100000)
          .optional()
          .describe(
            'Revolutions skipped before averaging so the live ' +
              'average forgets what came before. Default: 5 x the live ' +
              'average memory (160 revolutions with the default 32).',
          ),
        speed_tolerance_pct: z
          .number()
          .min(0.1)
          .max(20)
          .default(1)
          .describe(
            'A speed change beyond this, % of the speed at ' +
              'the start of the run, restarts the averaging.',
          ),
        max_restarts: z
          .number()
          .int()
          .min(0)
          .max(100)
          .default(3)
          .describe('Restarts after speed changes before the capture gives up.'),
      })
      .strict()
      .default({ revolutions: 100, speed_tolerance_pct: 1, max_restarts: 3 }),
  })
  .strict()
  .superRefine((l, ctx) => {
    const names = new Map<string, number>();
    l.tokens.forEach((t, i) => {
      const prev = names.get(t.name);
      if (prev !== undefined)
        ctx.addIssue({
          code: 'custom',
          path: ['tokens', i, 'name'],
          message: `name "${t.name}" is already used by tokens[${prev}]`,
        });
      else names.set(t.name, i);
    });
  });

export type LiveConfig = z.infer<typeof liveSchema>;
export type LiveTokenConfig = z.infer<typeof liveTokenSchema>;
