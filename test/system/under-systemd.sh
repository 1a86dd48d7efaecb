#!/usr/bin/env bash
# Runs deploy/ for real under systemd as PID 1: boots this machine's own root file system in a
# throw-away container (systemd-nspawn on an overlay whose changes are discarded), runs
# deploy/install.sh inside it, starts turnwise.service with a small probe program in place of
# `turnwise run`, and checks what systemd and journald saw:
#   - start completes on READY=1 sent through the sd_notify relay (Type=notify, NotifyAccess=all)
#   - watchdog pings keep a healthy service alive; withheld pings get it killed and restarted
#   - `journalctl -p warning` shows the warn and error lines only (syslog priority prefixes)
#   - a secret field is redacted in the journal
#   - the sandbox: state dir writable, /etc and /usr not, home hidden, groups dialout and gpio
#   - STOPPING=1 and a clean stop
#
# Not part of `npm test`: it needs root, overlayfs and systemd-nspawn (Debian package
# systemd-container) and takes a few minutes. Run it by hand: sudo test/system/under-systemd.sh
# It exits 0 when every check passed, 1 when one failed, 2 when it cannot run here.
set -euo pipefail

REPO=$(cd "$(dirname "${BASH_SOURCE[0]}")/../.." && pwd)
[ "$(id -u)" -eq 0 ] || { echo "under-systemd.sh: needs root" >&2; exit 2; }
command -v systemd-nspawn >/dev/null || { echo "under-systemd.sh: systemd-nspawn not found; apt-get install systemd-container" >&2; exit 2; }
[ -f "$REPO/dist/agent/cli/main.js" ] || { echo "under-systemd.sh: no dist/; run npm ci first" >&2; exit 2; }

W=$(mktemp -d /var/tmp/tw-systemd.XXXXXX)
M="$W/merged"
P="$W/probe"
mkdir -p "$W/upper" "$W/work" "$M" "$P"
# shellcheck disable=SC2317 # called by the EXIT trap
cleanup() {
  umount "$M" 2>/dev/null || true
  rm -rf "$W"
}
trap cleanup EXIT
mount -t overlay overlay -o "lowerdir=/,upperdir=$W/upper,workdir=$W/work" "$M" || { echo "under-systemd.sh: cannot mount overlayfs here" >&2; exit 2; }

# The probe: the production logger, notifier and watchdog keeper, as `turnwise run` will use them.
cat >"$P/service-probe.mjs" <<'EOF'
import { existsSync, readdirSync, readFileSync, writeFileSync } from 'node:fs';
const base = '/opt/turnwise/current/dist/agent';
const { createPinoLogger } = await import(`${base}/logging/pino-logger.js`);
const { createServiceNotifier } = await import(`${base}/service/systemd-notifier.js`);
const { WatchdogKeeper } = await import(`${base}/service/watchdog.js`);
const { systemTimers } = await import(`${base}/timers.js`);

const log = createPinoLogger({ level: 'debug', base: { asset: 'kessrow-id3a' } });
log.debug({ n: 1 }, 'probe debug line');
log.info({ n: 2 }, 'probe info line');
log.warn({ n: 3 }, 'probe warn line');
log.error({ n: 4, password: 'hunter2' }, 'probe error line');
const tryWrite = (f) => { try { writeFileSync(f, 'x'); return 'ok'; } catch (e) { return e.code; } };
const tryRead = (f) => { try { readFileSync(f); return 'ok'; } catch (e) { return e.code; } };
const tryList = (d) => { try { readdirSync(d); return 'ok'; } catch (e) { return e.code; } };
const groupNames = readFileSync('/etc/group', 'utf8').split('\n').map((l) => l.split(':')).filter((f) => process.getgroups().includes(Number(f[2]))).map((f) => f[0]).sort();
log.info({
  facts: {
    uid: process.getuid(), groups: groupNames.join(' '), cwd: process.cwd(),
    state_directory: process.env.STATE_DIRECTORY ?? null,
    // /var/lib/tw-probe-owned belongs to the service user: only ProtectSystem=strict stops the write.
    read_config: tryRead('/etc/turnwise/turnwise.yaml'), read_secret: tryRead('/etc/turnwise/mqtt-password'),
    write_state: tryWrite('/var/lib/turnwise/probe'), write_own_dir_outside_state: tryWrite('/var/lib/tw-probe-owned/probe'),
    list_root_home: tryList('/root'), write_tmp: tryWrite('/tmp/probe'),
  },
}, 'probe sandbox facts');
const notifier = createServiceNotifier({ logger: log });
const keeper = new WatchdogKeeper(notifier, systemTimers, log, () => (existsSync('/probe/stuck') ? 'the probe was told it is stuck' : null));
keeper.start();
notifier.ready(`probe up, watchdog ping every ${notifier.watchdogPingMs} ms`);
process.on('SIGTERM', async () => {
  keeper.stop();
  notifier.stopping('probe stopping on SIGTERM');
  await notifier.close();
  log.info({}, 'probe stopped');
  process.exit(0);
});
setInterval(() => {}, 60_000);
EOF

# Runs inside the container once it has booted.
cat >"$P/inside.sh" <<'EOF'
#!/bin/bash
exec >/probe/inside.log 2>&1
set -x
show() { for p in ActiveState SubState NRestarts StatusText; do printf '%s=%s ' "$p" "$(systemctl show turnwise -p "$p" --value)"; done; echo; }
/srv/turnwise/deploy/install.sh --no-apt --daq-usb-id 2e8a:000a >/probe/install.log 2>&1
echo "install_rc=$?" >/probe/results.txt
sed 's#^state_dir: .*#state_dir: /var/lib/turnwise#' /etc/turnwise/turnwise.yaml.example >/etc/turnwise/turnwise.yaml
# A secret the way docs/deployment.md says to put one there: readable by the service user only.
printf 'not-a-real-password\n' | install -m 0600 -o turnwise -g turnwise /dev/stdin /etc/turnwise/mqtt-password
mkdir -p /etc/systemd/system/turnwise.service.d
cat >/etc/systemd/system/turnwise.service.d/50-probe.conf <<'CONF'
[Service]
ExecStart=
ExecStart=/usr/bin/node /probe/service-probe.mjs
WatchdogSec=6s
RestartSec=1s
CONF
mkdir -p /var/lib/tw-probe-owned && chown turnwise:turnwise /var/lib/tw-probe-owned
systemctl daemon-reload
t0=$(date +%s%N)
systemctl start turnwise; echo "start_rc=$?" >>/probe/results.txt
echo "start_ms=$(( ($(date +%s%N) - t0) / 1000000 ))" >>/probe/results.txt
sleep 15
echo "healthy: $(show)" >>/probe/results.txt
SYSTEMD_COLORS=0 systemctl status turnwise --no-pager --lines=0 >/probe/status.txt 2>&1
systemctl show turnwise -p WatchdogUSec -p WatchdogTimestampMonotonic -p NotifyAccess >>/probe/status.txt
touch /probe/stuck
sleep 15
rm -f /probe/stuck
echo "stuck: $(show)" >>/probe/results.txt
sleep 5
echo "recovered: $(show)" >>/probe/results.txt
systemctl stop turnwise; echo "stop_rc=$?" >>/probe/results.txt
echo "stopped: $(show)" >>/probe/results.txt
journalctl -u turnwise -o cat -p warning --no-pager >/probe/journal-warning.txt
journalctl -u turnwise -o json --no-pager >/probe/journal.json
journalctl -u turnwise --no-pager >/probe/journal.txt
journalctl -b --no-pager -u turnwise -u init.scope >/probe/journal-pid1.txt 2>&1
echo done >>/probe/results.txt
systemctl poweroff
EOF
chmod 755 "$P/inside.sh"
chmod 755 "$P"

cat >"$M/etc/systemd/system/tw-probe-runner.service" <<'EOF'
[Unit]
Description=turnwise probe runner
After=multi-user.target
[Service]
Type=oneshot
ExecStart=/probe/inside.sh
EOF
mkdir -p "$M/etc/systemd/system/multi-user.target.wants"
ln -sf /etc/systemd/system/tw-probe-runner.service "$M/etc/systemd/system/multi-user.target.wants/tw-probe-runner.service"

echo "booting the container (a few minutes: install.sh runs npm ci inside)..." >&2
timeout 900 systemd-nspawn -q -D "$M" --keep-unit --register=no --link-journal=no --machine="tw-probe-$$" \
  --bind-ro="$REPO:/srv/turnwise" --bind="$P:/probe" -b >"$W/console.txt" 2>&1 || true

fail=0
check() { # check NAME COMMAND...
  if "${@:2}"; then echo "PASS $1"; else echo "FAIL $1"; fail=1; fi
}
R="$P/results.txt"
[ -f "$R" ] || { echo "under-systemd.sh: the probe did not run; console:" >&2; tail -40 "$W/console.txt" >&2; exit 1; }
cat "$R"
check "install.sh succeeded under systemd" grep -q '^install_rc=0$' "$R"
check "start completed on READY=1 (Type=notify through the relay)" grep -q '^start_rc=0$' "$R"
check "healthy service: active, not restarted, STATUS shown" grep -qE '^healthy: ActiveState=active SubState=running NRestarts=0 StatusText=probe up, watchdog ping every 3000 ms' "$R"
check "withheld pings: systemd killed and restarted it" grep -qE '^stuck: .*NRestarts=[1-9]' "$R"
check "watchdog timeout logged by systemd" grep -q 'Watchdog timeout' "$P/journal-pid1.txt"
check "recovered after the health check passed again" grep -qE '^recovered: ActiveState=active SubState=running' "$R"
check "clean stop" grep -q '^stop_rc=0$' "$R"
check "journalctl -p warning has the warn line" grep -q '"msg":"probe warn line"' "$P/journal-warning.txt"
check "journalctl -p warning has the error line" grep -q '"msg":"probe error line"' "$P/journal-warning.txt"
check "journalctl -p warning leaves out info" bash -c "! grep -q 'probe info line' '$P/journal-warning.txt'"
check "journalctl -p warning leaves out debug" bash -c "! grep -q 'probe debug line' '$P/journal-warning.txt'"
check "priorities stored as sent (<7> <6> <4> <3>)" node -e '
  const lines = require("fs").readFileSync(process.argv[1], "utf8").trim().split("\n").map(JSON.parse);
  const pri = (m) => lines.find((l) => String(l.MESSAGE).includes(m))?.PRIORITY;
  const got = ["probe debug line", "probe info line", "probe warn line", "probe error line"].map(pri).join(",");
  if (got !== "7,6,4,3") { console.error("priorities: " + got); process.exit(1); }' "$P/journal.json"
check "secret redacted in the journal" bash -c "! grep -q hunter2 '$P/journal.txt' && grep -q '\"password\":\"\\[redacted\\]\"' '$P/journal.txt'"
check "sandbox: config and a 0600 secret readable, state dir writable, the rest read-only, /root hidden, groups dialout and gpio" \
  grep -qE '"groups":"dialout gpio turnwise".*"read_config":"ok","read_secret":"ok","write_state":"ok","write_own_dir_outside_state":"EROFS","list_root_home":"(EACCES|ENOENT)"' "$P/journal.txt"
check "STOPPING=1 with its STATUS arrived, probe stopped itself" bash -c "grep -q '^stopped: .*StatusText=probe stopping on SIGTERM' '$R' && grep -q 'probe stopped' '$P/journal.txt'"
grep -o '"facts":{[^}]*}' "$P/journal.txt" | head -n1
echo "--- systemctl status while healthy:"; cat "$P/status.txt"
echo "--- journalctl -u turnwise -p warning -o cat:"; cat "$P/journal-warning.txt"
[ "$fail" = 0 ] && echo "all checks passed" || echo "some checks FAILED (logs in $P, kept)"
if [ "$fail" != 0 ]; then trap - EXIT; umount "$M" 2>/dev/null || true; fi
exit "$fail"
