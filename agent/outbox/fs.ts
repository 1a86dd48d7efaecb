import { constants } from 'node:fs';
import { mkdir, open, readFile, readdir, rename, unlink } from 'node:fs/promises';

/**
 * The few file operations the outbox needs, behind an interface so tests can inject faults (a full
 * disk, a failing fsync) without a special filesystem. `nodeOutboxFs` is the real one.
 */
export interface OutboxFs {
  mkdirp(dir: string): Promise<void>;
  list(dir: string): Promise<string[]>;
  read(file: string): Promise<Buffer>;
  /** Creates `file` (must not exist), writes all of `data`, fsyncs it and closes it. */
  writeNewSynced(file: string, data: Buffer): Promise<void>;
  rename(from: string, to: string): Promise<void>;
  /** fsync on the directory itself, so a create, rename or unlink inside it survives power loss. */
  syncDir(dir: string): Promise<void>;
  remove(file: string): Promise<void>;
}

export const nodeOutboxFs: OutboxFs = {
  async mkdirp(dir) {
    await mkdir(dir, { recursive: true, mode: 0o750 });
  },
  list: (dir) => readdir(dir),
  read: (file) => readFile(file),
  async writeNewSynced(file, data) {
    const fh = await open(file, constants.O_WRONLY | constants.O_CREAT | constants.O_EXCL, 0o640);
    try {
      let off = 0;
      while (off < data.length) {
        const { bytesWritten } = await fh.write(data, off, data.length - off);
        off += bytesWritten;
      }
      await fh.sync();
    } finally {
      await fh.close();
    }
  },
  rename: (from, to) => rename(from, to),
  async syncDir(dir) {
    const fh = await open(dir, constants.O_RDONLY | constants.O_DIRECTORY);
    try {
      await fh.sync();
    } finally {
      await fh.close();
    }
  },
  remove: (file) => unlink(file),
};
