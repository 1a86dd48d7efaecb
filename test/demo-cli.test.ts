import { describe, expect, it } from 'vitest';
import { spawn } from 'node:child_process';
import { createServer, type Server } from 'node:net';
import { existsSync, mkdtempSync, readdirSync, rmSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { fileURLToPath } from 'node:url';
import { expectNoStack, runCli } from './support/cli.js';

const CLI = fileURLToPath(new URL('../dist/agent/cli/main.js', import.meta.url));
const ports = ['--port', '0', '--mqtt-port', '0'];

/**
 * Runs the demo as a real process; `onLine` sees each stdout line as it comes and may return
 * 'interrupt' to send SIGINT (what Ctrl-C sends).
 */
function runDemo(
  args: string[],
  onLine: (line: string) => 'interrupt' | void,
  timeoutMs: number,
): Promise<{ code: number | null; stdout: string; stderr: string }> {
  return new Promise((resolve, reject) => {
    const p = spawn(process.execPath, [CLI, 'demo', ...args], {
      stdio: ['ignore', 'pipe', 'pipe'],
    });
    let stdout = '';
    let stderr = '';
    let partial = '';
    let interrupted = false;
    const timer = setTimeout(() => {
      p.kill('SIGKILL');
      reject(new Error(`demo still running after ${timeoutMs} ms; stdout so far:\n${stdout}`));
    }, timeoutMs);
    p.stdout.setEncoding('utf8').on('data', (d: string) => {
      stdout += d;
      partial += d;
      const lines = partial.split('\n');
      partial = lines.pop()!;
      for (const l of lines) {
        if (onLine(l) === 'interrupt' && !interrupted) {
          interrupted = true;
          p.kill('SIGINT');
        }
      }
    });
    p.stderr.setEncoding('utf8').on('data', (d: string) => (stderr += d));
    p.on('exit', (code) => {
      clearTimeout(timer);
      resolve({ code, stdout, stderr });
    });
  });
}

const stateLine = /^ {2}state {7}(\S+)/;

/**
 * `npm start` runs `turnwise demo`: the newcomer's first look must work on a laptop with no
 * hardware.
 */
describe('turnwise demo (npm start)', () => {
  it('plays day 5 into day 6: zone D and alarms, then the safe-stop advisory; Ctrl-C removes its temporary state', async () => {
    // Day 5 18:00 onwards at the default speed (one scenario day every 24 s, 2 s windows = 2 h
    // steps): the weight thrown at 14:20 has put NDE-H in zone D; NDE-V joins it in zone C on day
    // 6 08:00, which raises the demo's advisory (two channels of one bearing in C or worse) at
    // about 16 s.
    let stateDir: string | undefined;
    let existedWhileRunning = false;
    let contentsWhileRunning: string[] = [];
    const r = await runDemo(
      ['--seconds', '50', '--from-day', '5.75', '--speed', '3600', ...ports],
      (line) => {
        const m = stateLine.exec(line);
        if (m) {
          stateDir = m[1]!;
          existedWhileRunning = existsSync(stateDir);
        }
        if (/advisory_raised/.test(line)) {
          contentsWhileRunning = readdirSync(stateDir!);
          return 'interrupt';
        }
      },
      58_000,
    );
    expectNoStack(r.stderr);
    expect(r.code).toBe(0);
    expect(r.stdout).toMatch(/INVENTED DATA/);
    expect(r.stdout).toMatch(/live page\s+http:\/\/127\.0\.0\.1:\d+/);
    expect(r.stdout).toMatch(/mosquitto_sub -h 127\.0\.0\.1 -p \d+ -t 'demo\/kessrow\/#'/);
    expect(r.stdout).toMatch(/not a protective trip/);
    expect(r.stdout).toMatch(/\[day 5 \d\d:\d\d\] alarm\s+zone_changed machine zone D/);
    expect(r.stdout).toMatch(/\[day 5 \d\d:\d\d\] warning\s+alarm_level_exceeded NDE-H/);
    expect(r.stdout).toMatch(/unbalance_found kind \w+/);
    expect(r.stdout).toMatch(/\[day 6 \d\d:\d\d\] alarm\s+advisory_raised/);
    expect(r.stdout.indexOf('zone_changed machine zone D')).toBeLessThan(
      r.stdout.indexOf('advisory_raised'),
    );
    // The temporary state directory: announced, used while running, gone after Ctrl-C.
    expect(r.stdout).toMatch(
      /state {7}\S+ {3}\(temporary: removed when the demo ends; --state-dir DIR keeps it\)/,
    );
    expect(existedWhileRunning).toBe(true);
    expect(contentsWhileRunning.length).toBeGreaterThan(0);
    expect(existsSync(stateDir!)).toBe(false);
  });

  it('removes its temporary state when --seconds ends it, and keeps a --state-dir the user gave', async () => {
    let temp: string | undefined;
    const r = await runDemo(
      ['--seconds', '3', ...ports],
      (line) => void (temp = stateLine.exec(line)?.[1] ?? temp),
      30_000,
    );
    expect(r.code).toBe(0);
    expect(temp).toBeDefined();
    expect(existsSync(temp!)).toBe(false);

    const mine = join(mkdtempSync(join(tmpdir(), 'tw-demo-state-')), 'state');
    try {
      const k = runCli(['demo', '--seconds', '3', '--state-dir', mine, ...ports], {
        timeoutMs: 30_000,
      });
      expectNoStack(k.stderr);
      expect(k.code).toBe(0);
      expect(k.stdout).toContain(`state       ${mine}\n`);
      expect(existsSync(mine)).toBe(true);
      expect(readdirSync(mine).length).toBeGreaterThan(0);
    } finally {
      rmSync(join(mine, '..'), { recursive: true, force: true });
    }
  });

  it('a port already in use gets one message naming the port and the option that changes it, before anything starts', async () => {
    // A real listener holds a loopback port, as a demo left running would.
    const holder: Server = createServer();
    await new Promise<void>((r) => holder.listen(0, '127.0.0.1', () => r()));
    const taken = (holder.address() as { port: number }).port;
    try {
      const live = runCli(['demo', '--seconds', '2', '--port', String(taken), '--mqtt-port', '0'], {
        timeoutMs: 30_000,
      });
      expectNoStack(live.stderr);
      expect(live.code).toBe(2);
      expect(live.stdout).toBe('');
      expect(live.stderr).toBe(
        `turnwise demo: --port ${taken}: port ${taken} on 127.0.0.1, for the ` +
          `live page, is already in use, probably by another turnwise demo\n` +
          `  -> start the demo on another port, e.g. \`npm start -- --port ${taken + 1}\` ` +
          `(or --port 0 for any free port), or stop the program using port ${taken}\n`,
      );
      const mqtt = runCli(['demo', '--seconds', '2', '--port', '0', '--mqtt-port', String(taken)], {
        timeoutMs: 30_000,
      });
      expectNoStack(mqtt.stderr);
      expect(mqtt.code).toBe(2);
      expect(mqtt.stdout).toBe('');
      expect(mqtt.stderr).toMatch(
        new RegExp(
          `^turnwise demo: --mqtt-port ${taken}: port ${taken} on 127\\.0\\.0\\.1, for ` +
            `the embedded MQTT broker, is already in use, .+\\n {2}-> start the demo on ` +
            `another port, e\\.g\\. \`npm start -- --mqtt-port ${taken + 1}\`.+\\n$`,
        ),
      );
    } finally {
      await new Promise<void>((r) => holder.close(() => r()));
    }
  });
});
