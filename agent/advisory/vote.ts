import type { AdvisoryInput } from './input.js';

export interface VoteSettings {
  /** Zone at or above which an OK channel votes. */
  readonly zone: 'C' | 'D';
  /** Votes needed at one bearing. */
  readonly minChannels: number;
  /** Sensor ids allowed to vote; null = all. */
  readonly voters: ReadonlySet<string> | null;
}

export interface Vote {
  /** At least minChannels OK channels of one bearing at or above the zone. */
  readonly met: boolean;
  /** The bearing with the most votes when met. */
  readonly bearing: string | null;
  /** Sensor ids that voted at that bearing. */
  readonly channels: readonly string[];
  /**
   * Bearings whose OK voting channels are fewer than minChannels: the advisory cannot be raised for
   * them.
   */
  readonly bearingsWithoutVote: readonly string[];
}

const RANK = { A: 0, B: 1, C: 2, D: 3 } as const;

/**
 * Counts votes per bearing. A channel that is not OK never votes, whatever its zone (common
 * practice in machinery protection: a failed sensor or cable cannot cause a trip — API 670, from
 * memory).
 */
export function countVotes(input: AdvisoryInput, s: VoteSettings): Vote {
  const perBearing = new Map<string, { ok: number; votes: string[] }>();
  const need = RANK[s.zone];
  for (const ch of input.channels) {
    if (s.voters && !s.voters.has(ch.id)) continue;
    let b = perBearing.get(ch.bearing);
    if (!b) perBearing.set(ch.bearing, (b = { ok: 0, votes: [] }));
    if (!ch.ok) continue;
    b.ok++;
    if (ch.zone !== null && RANK[ch.zone] >= need) b.votes.push(ch.id);
  }
  let best: [string, string[]] | null = null;
  const without: string[] = [];
  for (const [bearing, b] of perBearing) {
    if (b.ok < s.minChannels) without.push(bearing);
    if (b.votes.length >= s.minChannels && (!best || b.votes.length > best[1].length))
      best = [bearing, b.votes];
  }
  return {
    met: best !== null,
    bearing: best?.[0] ?? null,
    channels: best?.[1] ?? [],
    bearingsWithoutVote: without.sort(),
  };
}
