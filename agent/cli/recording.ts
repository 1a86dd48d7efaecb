import type { Config } from '../config/schema.js';
import { Analyzer, type RevolutionTap } from '../dsp/analyzer.js';
import { UserError } from '../errors.js';
import { WavSource } from '../../drivers/wav/reader.js';
import { parseCommandArgs } from './args.js';
import type { Progress } from './progress.js';

/**
 * The arguments every command that reads one recording takes: REC.wav --config CFG.yaml [--json]
 * [--pcm-full-scale-v VOLTS].
 */
export function recordingArgs(
  command: string,
  usage: string,
  argv: string[],
): { file: string; config: string; json: boolean; pcmFullScaleV: number | undefined } {
  const { values, positionals } = parseCommandArgs(command, usage, argv, {
    config: { type: 'string', short: 'c' },
    json: { type: 'boolean' },
    'pcm-full-scale-v': { type: 'string' },
  });
  const file = positionals[0];
  if (!file || positionals.length > 1)
    throw new UserError(`turnwise ${command}`, 'expects exactly one recording', `usage: ${usage}`);
  if (!values.config)
    throw new UserError(`turnwise ${command}`, 'missing --config', `usage: ${usage}`);
  let pcmFullScaleV: number | undefined;
  if (values['pcm-full-scale-v'] !== undefined) {
    pcmFullScaleV = Number(values['pcm-full-scale-v']);
    if (!(pcmFullScaleV > 0))
      throw new UserError(
        '--pcm-full-scale-v',
        `expects a positive number of volts, got "${values['pcm-full-scale-v']}"`,
        'e.g. --pcm-full-scale-v 10 for a +/-10 V board',
      );
  }
  return { file, config: values.config, json: values.json === true, pcmFullScaleV };
}

/**
 * Pushes a whole recording through the measurement core (progress on stderr) and checks that the
 * tach gave trustworthy revolutions; returns the analyzer, its window still open. `tapFor` builds
 * a consumer of every trusted revolution once the sample rate is known (the sweep's speed points).
 */
export async function measureRecording(
  file: string,
  cfg: Config,
  opts: {
    pcmFullScaleV?: number;
    progress?: Progress;
    tapFor?: (sampleRate: number) => RevolutionTap;
  } = {},
): Promise<{ analyzer: Analyzer; sampleRate: number }> {
  const src = new WavSource(file, { blockFrames: 8192, pcmFullScaleV: opts.pcmFullScaleV });
  const info = await src.open();
  try {
    const an = new Analyzer({
      config: cfg,
      sampleRate: info.sampleRate,
      channelCount: info.channelCount,
      maxBlock: 8192,
      totalSamples: info.totalSamples,
      sourceName: file,
      revolutionTap: opts.tapFor?.(info.sampleRate),
    });
    const total = info.totalSamples ?? 0;
    for await (const item of src.items()) {
      an.push(item);
      if (item.kind === 'samples') {
        const done = item.startIndex + (item.channels[0]?.length ?? 0);
        opts.progress?.update(
          done,
          total,
          `${(done / info.sampleRate).toFixed(1)} of ${(total / info.sampleRate).toFixed(1)} s`,
        );
      }
    }
    opts.progress?.done();
    const problem = an.diagnoseTach();
    if (problem)
      throw new UserError(
        file,
        problem,
        'no order vectors can be measured without a trustworthy once-per-turn reference',
      );
    return { analyzer: an, sampleRate: info.sampleRate };
  } finally {
    await src.close();
  }
}
