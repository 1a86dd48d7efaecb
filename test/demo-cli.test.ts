import { describe, expect, it } from 'vitest';
import { expectNoStack, runCli } from './support/cli.js';

/** `npm start` runs `turnwise demo`: the newcomer's first look must work on a laptop with no hardware. */
describe('turnwise demo (npm start)', () => {
  it('starts the simulated fan, an embedded broker and the live page, prints where to look, and reports events', () => {
    const r = runCli(['demo', '--seconds', '10', '--from-day', '5.5', '--speed', '3600', '--port', '0', '--mqtt-port', '0'], { timeoutMs: 60_000 });
    expectNoStack(r.stderr);
    expect(r.code).toBe(0);
    expect(r.stdout).toMatch(/INVENTED DATA/);
    expect(r.stdout).toMatch(/live page\s+http:\/\/127\.0\.0\.1:\d+/);
    expect(r.stdout).toMatch(/mosquitto_sub -h 127\.0\.0\.1 -p \d+ -t 'demo\/kessrow\/#'/);
    expect(r.stdout).toMatch(/not a protective trip/);
    expect(r.stdout).toMatch(/\[day 5 \d\d:\d\d\] \w+\s+zone_changed machine zone [A-D]/);
    expect(r.stdout).toMatch(/unbalance_found kind \w+/);
  });
});
