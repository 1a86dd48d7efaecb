import { defineConfig } from 'vitest/config';

export default defineConfig({
  test: {
    include: ['test/**/*.test.ts'],
    // One shared mosquitto (unless TURNWISE_TEST_MQTT_URL names a broker) and the python3 to use.
    globalSetup: ['test/support/global-setup.ts'],
    // Native addons (serialport, epoll) are not safe in worker threads: keep the default forks
    // pool.
    pool: 'forks',
    testTimeout: 60_000,
    hookTimeout: 60_000,
  },
});
