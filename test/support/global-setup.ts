import { testPython } from '../../scripts/test-prereqs.mjs';
import { Mosquitto } from './mosquitto.js';

/**
 * Vitest global setup (vitest.config.ts), run once before any test file:
 * - a shared mosquitto on a free loopback port for the tests that need a plain broker
 *   (`plainBroker()` in mosquitto.ts), unless TURNWISE_TEST_MQTT_URL already names one; tests
 *   that need TLS, passwords or a broker restart still start their own;
 * - TURNWISE_PYTHON set to the python3 that has numpy, scipy and protobuf (python3 on PATH, or
 *   Debian's /usr/bin/python3 when the one on PATH lacks them), unless it is set.
 * Both reach the test workers through their environment.
 */
export default async function setup(): Promise<() => Promise<void>> {
  if (!process.env.TURNWISE_PYTHON) process.env.TURNWISE_PYTHON = testPython();
  let broker: Mosquitto | null = null;
  if (!process.env.TURNWISE_TEST_MQTT_URL) {
    try {
      broker = await Mosquitto.start();
      process.env.TURNWISE_TEST_MQTT_URL = broker.url;
    } catch (e) {
      // `npm test` checked for mosquitto first; a single file run without it only fails its MQTT
      // tests.
      process.stderr.write(
        `test setup: no shared mosquitto (${(e as Error).message.split('\n')[0]}); ` +
          `tests that need a broker will fail\n  -> install it: apt-get install mosquitto ` +
          `(\`node scripts/test-prereqs.mjs\` checks everything the tests use)\n`,
      );
    }
  }
  return async () => {
    if (broker) await broker.dispose();
  };
}
