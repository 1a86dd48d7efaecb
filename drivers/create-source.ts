import { existsSync } from 'node:fs';
import { dirname, resolve } from 'node:path';
import type { Config } from '../agent/config/schema.js';
import { UserError } from '../agent/errors.js';
import type { Logger } from '../agent/log.js';
import { PacedSource } from './paced-source.js';
import type { Pacer } from './pacer.js';
import { SerialSource, serialOptionsFromConfig } from './serial/serial-source.js';
import { createSimSource } from './sim/source.js';
import type { SampleSource } from './source.js';
import { WavSource } from './wav/reader.js';

export interface CreatedSource {
  readonly source: SampleSource;
  /**
   * True when the blocks carry tach edges timed by the board (or the simulator playing one), so the
   * measurement core takes those instead of looking for edges on the tach channel.
   */
  readonly boardTimesTach: boolean;
}

export interface CreateSourceDeps {
  /** Where a live source logs its problems (the serial board's bursts of errors, reconnects). */
  readonly log: Logger;
  /** Wall clock for sources paced in real time (tests inject one). */
  readonly pacer?: Pacer;
}

/**
 * The one place that turns the config's `acquisition` section into a sample source: a recording
 * (`wav`), the acquisition board on a serial port (`serial`) or the simulated fan (`sim`). Paths in
 * the section are relative to the config file's folder. Nothing is opened here: `source.open()`
 * does that and names what is wrong (a missing recording, an absent board is retried).
 */
export function createSource(
  cfg: Config,
  configFile: string,
  deps: CreateSourceDeps,
): CreatedSource {
  const a = cfg.acquisition;
  if (!a) {
    throw new UserError(
      `${configFile}: acquisition`,
      'the config says nowhere where the samples come from',
      'add an acquisition section: driver wav (a recording), serial (the board) ' +
        'or sim (the simulated fan); see config/example.yaml and docs/acquisition.md',
    );
  }
  switch (a.driver) {
    case 'wav': {
      const wav = new WavSource(existingFile(configFile, 'file', a.file, 'recording'), {
        pcmFullScaleV: a.pcm_full_scale_v,
      });
      return { source: a.realtime ? new PacedSource(wav, deps.pacer) : wav, boardTimesTach: false };
    }
    case 'serial':
      return {
        source: new SerialSource(serialOptionsFromConfig(a, deps.log)),
        boardTimesTach: a.board_tach_edges,
      };
    case 'sim':
      existingFile(configFile, 'scenario', a.scenario, 'scenario file');
      return {
        source: createSimSource(cfg, a, configFile, { pacer: deps.pacer }),
        boardTimesTach: a.board_tach_edges,
      };
  }
}

/**
 * The absolute path of a file the section names, relative to the config's folder; a UserError
 * naming the key when it is not there.
 */
function existingFile(configFile: string, key: string, path: string, what: string): string {
  const folder = dirname(resolve(configFile));
  const abs = resolve(folder, path);
  if (!existsSync(abs)) {
    throw new UserError(
      `${configFile}: acquisition.${key}`,
      `${what} ${abs} not found (a relative path is ` +
        `taken from the config file's folder, ${folder})`,
      `fix acquisition.${key}, or put the ${what} there`,
    );
  }
  return abs;
}
