import { execFileSync } from 'node:child_process';
import { mkdtempSync, rmSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';

/**
 * A real small filesystem for full-disk tests: a 64 KiB tmpfs. Mounting needs root (CAP_SYS_ADMIN);
 * null where it is not allowed, and the caller skips its test.
 */
export function tryMountTmpfs(): string | null {
  if (process.getuid?.() !== 0) return null;
  const d = mkdtempSync(join(tmpdir(), 'tw-tmpfs-'));
  try {
    execFileSync('mount', ['-t', 'tmpfs', '-o', 'size=64k', 'tmpfs', d], { stdio: 'ignore' });
    return d;
  } catch {
    rmSync(d, { recursive: true, force: true });
    return null;
  }
}

export function unmountTmpfs(mnt: string): void {
  execFileSync('umount', [mnt]);
  rmSync(mnt, { recursive: true, force: true });
}

/**
 * Fills the filesystem at `mnt` with a ballast file until the kernel refuses; returns the error
 * code of the refusal (ENOSPC on a full disk) and the ballast's path (remove it to free the space).
 */
export function fillUp(mnt: string): { code: string | null; ballast: string } {
  const ballast = join(mnt, 'ballast');
  try {
    writeFileSync(ballast, Buffer.alloc(128 * 1024));
    return { code: null, ballast };
  } catch (e) {
    return { code: (e as NodeJS.ErrnoException).code ?? null, ballast };
  }
}
