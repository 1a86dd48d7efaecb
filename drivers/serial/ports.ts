/**
 * Finding the acquisition board: stable device links and what went wrong when opening one.
 * Nothing here may take the agent down: listing never throws.
 */
import { readdir, realpath } from 'node:fs/promises';
import { join } from 'node:path';

export const BY_ID_DIR = '/dev/serial/by-id';

export interface StablePort {
  /** The stable link, e.g. /dev/serial/by-id/usb-Maker_Board_1234-if00. */
  readonly path: string;
  /** What it points to now, e.g. /dev/ttyACM0 (null when the link dangles). */
  readonly target: string | null;
}

/** Lists the links udev keeps under /dev/serial/by-id (none when the directory is missing). */
export async function listStablePorts(dir = BY_ID_DIR): Promise<StablePort[]> {
  let names: string[];
  try {
    names = await readdir(dir);
  } catch {
    return [];
  }
  names.sort();
  return Promise.all(
    names.map(async (n) => {
      const path = join(dir, n);
      try {
        return { path, target: await realpath(path) };
      } catch {
        return { path, target: null };
      }
    }),
  );
}

export interface PortDetail {
  readonly path: string;
  readonly manufacturer?: string;
  readonly serialNumber?: string;
  readonly vendorId?: string;
  readonly productId?: string;
}

export interface PortListing {
  readonly stable: StablePort[];
  /** From serialport's list(); empty with `listError` set when it failed. */
  readonly detailed: PortDetail[];
  readonly listError: string | null;
}

/**
 * Everything known about serial ports. serialport's list() runs `udevadm` on Linux; where udevadm
 * is missing it fails with ENOENT, which is caught here and explained instead of ending the
 * process.
 */
export async function listPorts(dir = BY_ID_DIR): Promise<PortListing> {
  const stable = await listStablePorts(dir);
  try {
    const { SerialPort } = await import('serialport');
    const detailed = await SerialPort.list();
    return { stable, detailed, listError: null };
  } catch (e) {
    const err = e as NodeJS.ErrnoException;
    const listError =
      err.code === 'ENOENT'
        ? 'udevadm is not installed, so USB details are unavailable (install ' +
          'the Debian package udev); the /dev/serial/by-id links still work'
        : `listing serial ports failed: ${err.message}`;
    return { stable, detailed: [], listError };
  }
}

export interface OpenFailure {
  /** Short class of the failure, used to group log lines. */
  readonly kind: 'not_found' | 'permission' | 'locked' | 'busy' | 'other';
  readonly detail: string;
  /** What to do about it. */
  readonly hint: string;
}

/**
 * Explains why opening `device` failed. serialport reports most of these in the message text only.
 */
export function describeOpenFailure(device: string, err: Error): OpenFailure {
  const code = (err as NodeJS.ErrnoException).code;
  const msg = err.message;
  if (code === 'ENOENT' || /No such file or directory/i.test(msg)) {
    return {
      kind: 'not_found',
      detail: `${device} does not exist`,
      hint:
        'check the board is plugged in and powered; use its ' +
        '/dev/serial/by-id/... link (`turnwise probe-serial` lists them)',
    };
  }
  if (code === 'EACCES' || /Permission denied/i.test(msg)) {
    return {
      kind: 'permission',
      detail: `no permission to open ${device}`,
      hint:
        'add the service user to the dialout group (sudo usermod -aG dialout ' +
        'USER, then log in again) or install deploy/udev/70-turnwise-daq.rules',
    };
  }
  if (/Cannot lock port/i.test(msg)) {
    return {
      kind: 'locked',
      detail: `${device} is locked by another open handle`,
      hint:
        'another program (a second turnwise, a terminal program) ' +
        'has the port open; stop it. Right after an unplug the old ' +
        'handle may still be closing: the agent retries by itself',
    };
  }
  if (code === 'EBUSY' || /Resource busy|Device or resource busy/i.test(msg)) {
    return {
      kind: 'busy',
      detail: `${device} is busy`,
      hint:
        'ModemManager probes new ttyACM devices for several seconds: install ' +
        'deploy/udev/70-turnwise-daq.rules (sets ID_MM_DEVICE_IGNORE) or stop ModemManager',
    };
  }
  return {
    kind: 'other',
    detail: `cannot open ${device}: ${msg}`,
    hint: 'check the device path and the board',
  };
}
