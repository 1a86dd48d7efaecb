/**
 * Topic layout under `<prefix>/<asset>` (asset = machine.id):
 *
 *   <prefix>/<asset>/status         retained, QoS 1  online/offline; the broker publishes the offline
 *                                                    last-will when the agent vanishes
 *   <prefix>/<asset>/heartbeat      QoS 0            health counters every mqtt.heartbeat_s
 *   <prefix>/<asset>/event/<type>   QoS 1            events from the durable outbox, in order
 *   <prefix>/<asset>/live           QoS 0            overall levels and 1x vectors, at most every mqtt.live_interval_s
 *   <prefix>/<asset>/cmd            QoS 1 (in)       commands to the agent
 *   <prefix>/<asset>/cmd/reply      QoS 1            one reply per command, with its correlation id
 */
export interface Topics {
  readonly base: string;
  readonly status: string;
  readonly heartbeat: string;
  readonly live: string;
  readonly cmd: string;
  readonly cmdReply: string;
  event(type: string): string;
}

const EVENT_TYPE = /^[A-Za-z0-9_.-]{1,64}$/;

export function topicsFor(prefix: string, asset: string): Topics {
  const base = `${prefix}/${asset}`;
  return {
    base,
    status: `${base}/status`,
    heartbeat: `${base}/heartbeat`,
    live: `${base}/live`,
    cmd: `${base}/cmd`,
    cmdReply: `${base}/cmd/reply`,
    event(type) {
      // Event types come from the agent's own code; anything else still gets a valid topic level.
      return `${base}/event/${EVENT_TYPE.test(type) ? type : 'other'}`;
    },
  };
}
