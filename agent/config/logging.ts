import { z } from 'zod';

/** `logging:` section: how the agent writes its log (stdout; the journal under systemd). */
export const loggingSchema = z
  .object({
    level: z
      .enum(['debug', 'info', 'warn', 'error'])
      .default('info')
      .describe('Lowest level written.'),
    syslog_prefix: z
      .enum(['auto', 'on', 'off'])
      .default('auto')
      .describe(
        'Syslog priority prefix (<3> error, <4> warn, <6> info, <7> ' +
          'debug) in front of each line, so `journalctl -p warning` ' +
          'works. auto: on when stdout is the systemd journal.',
      ),
  })
  .strict()
  .default({ level: 'info', syslog_prefix: 'auto' });

export type LoggingConfig = z.infer<typeof loggingSchema>;
