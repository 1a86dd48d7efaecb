/**
 * A laptop without GPIO, or a board where the native addons did not build: onoff (epoll) and
 * serialport cannot be loaded. Every module must still load (nothing imports them at top level),
 * and using them must end in a UserError that says what to do, not a crash.
 */
import { mkdirSync, mkdtempSync, rmSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { describe, expect, it, vi } from 'vitest';
import { UserError } from '../agent/errors.js';

vi.mock('onoff', () => {
  throw new Error("Cannot find module './build/Release/epoll.node' (simulated: no native addon)");
});
vi.mock('serialport', () => {
  throw new Error('No native build was found for platform=test (simulated)');
});

describe('without native addons', () => {
  it('loads the CLI commands and every acquisition module', async () => {
    const mods = await Promise.all([
      import('../agent/cli/commands/index.js'),
      import('../drivers/gpio/onoff-lines.js'),
      import('../drivers/gpio/fake-lines.js'),
      import('../drivers/gpio/tach-speed.js'),
      import('../drivers/serial/serial-source.js'),
      import('../drivers/serial/ports.js'),
      import('../drivers/serial/probe.js'),
    ]);
    expect(mods[0].commands.map((c) => c.name)).toContain('probe-serial');
    // Each command's module loads only when the command runs: load every one here.
    const loaded = await Promise.all(mods[0].commands.map((c) => c.load()));
    expect(loaded.map((c) => c.name)).toEqual(mods[0].commands.map((c) => c.name));
  });

  it('turns a missing onoff into a UserError after picking the chip', async () => {
    const root = mkdtempSync(join(tmpdir(), 'tw-sysfs-'));
    try {
      mkdirSync(join(root, 'gpiochip512'));
      writeFileSync(join(root, 'gpiochip512', 'base'), '512\n');
      writeFileSync(join(root, 'gpiochip512', 'label'), 'pinctrl-bcm2711\n');
      writeFileSync(join(root, 'gpiochip512', 'ngpio'), '58\n');
      const { OnoffLines } = await import('../drivers/gpio/onoff-lines.js');
      const err = await OnoffLines.open({
        sysfsRoot: root,
        log: { debug() {}, info() {}, warn() {}, error() {} },
      }).catch((e: unknown) => e);
      expect(err).toBeInstanceOf(UserError);
      expect((err as UserError).message).toMatch(/the onoff module could not be loaded/);
      expect((err as UserError).hint).toMatch(/npm rebuild epoll/);
    } finally {
      rmSync(root, { recursive: true, force: true });
    }
  });

  it('turns a missing serialport into a UserError, and port listing still answers', async () => {
    const { SerialSource } = await import('../drivers/serial/serial-source.js');
    const src = new SerialSource({
      device: '/dev/null',
      baud: 9600,
      sampleRateHz: 1000,
      channels: 1,
      reconnectMinMs: 100,
      reconnectMaxMs: 200,
      stallTimeoutMs: 1000,
      queueFrames: 4,
      maxFrameBytes: 4096,
      log: { debug() {}, info() {}, warn() {}, error() {} },
    });
    const err = await src.open().catch((e: unknown) => e);
    expect(err).toBeInstanceOf(UserError);
    expect((err as UserError).hint).toMatch(/npm rebuild @serialport\/bindings-cpp/);
    const { listPorts } = await import('../drivers/serial/ports.js');
    const l = await listPorts('/nonexistent');
    expect(l.detailed).toEqual([]);
    expect(l.listError).toMatch(/listing serial ports failed/);
  });
});
