#!/usr/bin/env bash
# Installs, upgrades, rolls back or removes turnwise on a Debian-based board image
# (Debian 12, Raspberry Pi OS bookworm, Ubuntu 22.04 or newer). See docs/deployment.md.
#
# Layout it maintains:
#   /opt/turnwise/releases/<version>-<content hash>/   one directory per release, never changed once complete
#   /opt/turnwise/current  -> releases/...              what the service runs (switched atomically)
#   /opt/turnwise/previous -> releases/...              what --rollback goes back to
#   /etc/turnwise/turnwise.yaml                          the plant's config (never overwritten)
#   /var/lib/turnwise/                                   state (systemd StateDirectory=)
#   /etc/systemd/system/turnwise.service, /etc/udev/rules.d/70-turnwise-daq.rules and
#   99-turnwise-gpio.rules (from deploy/udev/), /etc/systemd/journald.conf.d/60-turnwise.conf,
#   /usr/local/bin/turnwise
#
# Every change is printed as "+ command" before it runs; --dry-run prints them and runs none.
# Running it twice changes nothing the second time.
set -euo pipefail
umask 022

usage() {
  cat <<'EOF'
usage: sudo deploy/install.sh [options]              install, or upgrade to the release in this tree
       sudo deploy/install.sh --rollback [RELEASE]   switch back to the previous (or the named) release
       sudo deploy/install.sh --list                 list installed releases
       sudo deploy/install.sh --uninstall [--purge]  remove turnwise (--purge: also config, state and user)

options:
  --daq-usb-id VVVV:PPPP  USB vendor:product id of the acquisition board (for /dev/turnwise-daq);
                          kept from the installed rules when not given
  --from DIR              the release tree to install (default: the tree this script is in);
                          it must hold dist/ (run `npm ci` once on any machine to build it)
  --no-apt                do not install Debian packages (build tools, python3); only check
  --no-journald-limits    do not install the journald size bounds
  --keep N                releases kept besides current and previous (default 3)
  --dry-run               print every action, change nothing
  --root DIR              install the files under DIR (an image being built, or a test); user,
                          groups, packages and systemctl/udevadm calls are printed, not run
  -h, --help              this text

environment: TURNWISE_NODE (node binary, default: node on PATH), TURNWISE_NPM (default: npm)
EOF
}

# ---- options ----------------------------------------------------------------------------------
MODE=install
DRY_RUN=0
ROOT=""
PURGE=0
DAQ_USB_ID=""
ROLLBACK_TO=""
NO_APT=0
NO_JOURNALD=0
KEEP=3
SRC_DIR=$(cd "$(dirname "${BASH_SOURCE[0]}")/.." && pwd)
ORIG_ARGS=("$@")

die() {
  printf 'install.sh: %s\n' "$1" >&2
  if [ $# -gt 1 ]; then printf '  -> %s\n' "$2" >&2; fi
  exit "${3:-1}"
}

while [ $# -gt 0 ]; do
  case "$1" in
    --dry-run) DRY_RUN=1 ;;
    --root) [ $# -ge 2 ] || die "--root needs a directory" "e.g. --root /tmp/image" 2; ROOT=$2; shift ;;
    --from) [ $# -ge 2 ] || die "--from needs a directory" "the unpacked release tree, holding package.json and dist/" 2; SRC_DIR=$2; shift ;;
    --daq-usb-id) [ $# -ge 2 ] || die "--daq-usb-id needs VVVV:PPPP" "e.g. --daq-usb-id 2e8a:000a (see lsusb)" 2; DAQ_USB_ID=$2; shift ;;
    --keep) [ $# -ge 2 ] || die "--keep needs a number" "e.g. --keep 3" 2; KEEP=$2; shift ;;
    --no-apt) NO_APT=1 ;;
    --no-journald-limits) NO_JOURNALD=1 ;;
    --uninstall) MODE=uninstall ;;
    --purge) PURGE=1 ;;
    --list) MODE=list ;;
    --rollback)
      MODE=rollback
      if [ $# -ge 2 ] && [ "${2#-}" = "$2" ]; then ROLLBACK_TO=$2; shift; fi
      ;;
    -h | --help) usage; exit 0 ;;
    *) die "unknown option '$1'" "run deploy/install.sh --help for the options" 2 ;;
  esac
  shift
done

if [ -n "$DAQ_USB_ID" ] && ! [[ "$DAQ_USB_ID" =~ ^[0-9a-fA-F]{4}:[0-9a-fA-F]{4}$ ]]; then
  die "--daq-usb-id '$DAQ_USB_ID' is not VVVV:PPPP (4 hex digits each)" "e.g. --daq-usb-id 2e8a:000a, as lsusb shows it" 2
fi
case "$KEEP" in '' | *[!0-9]*) die "--keep must be a whole number (got '$KEEP')" "e.g. --keep 3" 2 ;; esac
if [ -n "$ROOT" ]; then
  [ -d "$ROOT" ] || die "--root $ROOT is not a directory" "create it first" 2
  ROOT=$(cd "$ROOT" && pwd)
fi
if [ "$PURGE" = 1 ] && [ "$MODE" != uninstall ]; then die "--purge goes with --uninstall" "deploy/install.sh --uninstall --purge" 2; fi

NODE=${TURNWISE_NODE:-$(command -v node || true)}
NPM=${TURNWISE_NPM:-npm}

# Paths as the running system sees them, and where this run writes them (under --root).
OPT=/opt/turnwise
ETC=/etc/turnwise
STATE=/var/lib/turnwise
UNIT=/etc/systemd/system/turnwise.service
UNIT_D=/etc/systemd/system/turnwise.service.d
UDEV_DAQ=/etc/udev/rules.d/70-turnwise-daq.rules
UDEV_GPIO=/etc/udev/rules.d/99-turnwise-gpio.rules
# The USB id in deploy/udev/70-turnwise-daq.rules until --daq-usb-id replaces it (pid.codes test id).
PLACEHOLDER_USB_ID=1209:0001
JOURNALD_CONF=/etc/systemd/journald.conf.d/60-turnwise.conf
CLI_LINK=/usr/local/bin/turnwise
R_OPT="$ROOT$OPT"
R_RELEASES="$R_OPT/releases"

# What a release holds, relative to the source tree (dist/test and the TypeScript sources stay
# behind; the live page's own files are plain JavaScript, HTML and CSS served from agent/live/page).
RELEASE_PATHS=(package.json package-lock.json dist/agent dist/drivers agent/live/page deploy config README.md docs)
COMPLETE_MARK=.turnwise-release-complete
CHANGED=0

# ---- how actions run ---------------------------------------------------------------------------
say() { printf '%s\n' "$*"; }
warn() { printf 'install.sh: WARNING: %s\n' "$*" >&2; }
show() { printf '+'; printf ' %q' "$@"; printf '\n'; }
# A change to files (under --root when given).
act() {
  show "$@"
  if [ "$DRY_RUN" = 0 ]; then "$@"; fi
}
# A change to the system itself (packages, users, services): never under --root.
sys() {
  if [ "$DRY_RUN" = 0 ] && [ -n "$ROOT" ]; then
    printf '+ (not run under --root)'; printf ' %q' "$@"; printf '\n'
    return 0
  fi
  act "$@"
}

TMP_FILES=()
cleanup() { if [ ${#TMP_FILES[@]} -gt 0 ]; then rm -f "${TMP_FILES[@]}"; fi; }
trap cleanup EXIT
tmpfile() {
  local f
  f=$(mktemp "${TMPDIR:-/tmp}/turnwise-install.XXXXXX")
  TMP_FILES+=("$f")
  printf '%s' "$f"
}

# Installs file $1 as $2 (path on the running system) with mode $3 when its content differs.
put_file() {
  local src=$1 dest="$ROOT$2" mode=$3
  if [ -f "$dest" ] && cmp -s "$src" "$dest"; then
    say "unchanged: $2"
    return 0
  fi
  act install -D -m "$mode" "$src" "$dest"
  CHANGED=1
}

# Removes a file, link or directory when it exists.
remove() {
  local p="$ROOT$1"
  if [ -e "$p" ] || [ -L "$p" ]; then
    act rm -rf "$p"
  else
    say "already absent: $1"
  fi
}

# ---- checks ------------------------------------------------------------------------------------
preflight_system() {
  if [ "$DRY_RUN" = 0 ] && [ -z "$ROOT" ] && [ "$(id -u)" -ne 0 ]; then
    die "must run as root" "sudo $0 ${ORIG_ARGS[*]}"
  fi
  if [ -z "$ROOT" ] && [ "$DRY_RUN" = 0 ]; then
    exec 9>/run/lock/turnwise-install.lock
    command -v flock >/dev/null && { flock -n 9 || die "another install.sh is running" "wait for it to finish"; }
  fi
}

check_node() {
  if [ -z "$NODE" ] || [ ! -x "$NODE" ]; then
    die "Node.js not found (looked for '${NODE:-node}' on PATH)" \
      "install Node.js 20.19 or newer system-wide (e.g. the nodejs package of NodeSource), or set TURNWISE_NODE=/path/to/node"
  fi
  local v major minor
  v=$("$NODE" -p 'process.versions.node') || die "$NODE does not run" "check the Node.js installation"
  [[ "$v" =~ ^[0-9]+\.[0-9]+ ]] || die "$NODE reports version '$v', not a Node.js version" "point TURNWISE_NODE at the node binary"
  major=${v%%.*}
  minor=${v#*.}
  minor=${minor%%.*}
  if [ "$major" -lt 20 ] || { [ "$major" -eq 20 ] && [ "$minor" -lt 19 ]; }; then
    die "Node.js $v at $NODE is too old: turnwise needs 20.19 or newer" "upgrade Node.js (serialport 13 and the build need it), or point TURNWISE_NODE at a newer one"
  fi
  case "$NODE" in
    /root/* | /home/*) die "Node.js at $NODE is inside a home directory, which the service cannot see (ProtectHome=yes)" \
      "install Node.js system-wide (/usr/bin or /usr/local/bin) and run again" ;;
  esac
  command -v "$NPM" >/dev/null || die "npm not found ('$NPM')" "install npm with Node.js, or set TURNWISE_NPM"
  say "Node.js $v at $NODE"
}

check_source() {
  local p
  for p in package.json package-lock.json dist/agent/cli/main.js agent/live/page/index.html deploy/turnwise.service deploy/udev/70-turnwise-daq.rules deploy/udev/99-turnwise-gpio.rules; do
    [ -e "$SRC_DIR/$p" ] || die "$SRC_DIR/$p is missing: not a built turnwise release tree" \
      "run \`npm ci\` in the source tree (it compiles dist/), or give the right tree with --from DIR"
  done
}

pkg_installed() { dpkg-query -W -f='${Status}' "$1" 2>/dev/null | grep -q 'install ok installed'; }

ensure_packages() {
  # build-essential and python3: node-gyp builds epoll (GPIO) on install; python3 also runs the
  # sd_notify relay. udev: the rules below.
  local need=() p
  if ! command -v dpkg-query >/dev/null; then
    warn "dpkg-query not found: not a Debian-based image? Make sure build tools (make, g++), python3 and udev are installed."
    return 0
  fi
  for p in build-essential python3 udev; do pkg_installed "$p" || need+=("$p"); done
  if [ ${#need[@]} -eq 0 ]; then
    say "Debian packages present: build-essential python3 udev"
  elif [ "$NO_APT" = 1 ]; then
    warn "missing Debian packages: ${need[*]} (--no-apt given: not installing them; native modules may fail to build)"
  else
    sys apt-get update
    sys env DEBIAN_FRONTEND=noninteractive apt-get install -y --no-install-recommends "${need[@]}"
  fi
}

ensure_user() {
  getent group gpio >/dev/null || sys groupadd --system gpio
  getent group dialout >/dev/null || sys groupadd --system dialout
  if getent passwd turnwise >/dev/null; then
    say "user turnwise exists"
  else
    sys useradd --system --user-group --home-dir "$STATE" --no-create-home --shell /usr/sbin/nologin --comment "turnwise vibration watch" turnwise
  fi
}

# ---- releases ----------------------------------------------------------------------------------
release_name() {
  local version hash p present=()
  version=$("$NODE" -e 'process.stdout.write(String(require(process.argv[1]).version))' "$SRC_DIR/package.json")
  for p in "${RELEASE_PATHS[@]}"; do if [ -e "$SRC_DIR/$p" ]; then present+=("$p"); fi; done
  # Content hash: the same tree always gives the same name (a second run finds it installed);
  # a rebuilt tree with the same version number gets a new one.
  hash=$(cd "$SRC_DIR" && find "${present[@]}" -type f -print0 | LC_ALL=C sort -z | xargs -0 sha256sum | sha256sum | cut -c1-10)
  printf '%s-%s' "$version" "$hash"
}

# The node program that proves the native modules load on this board.
SMOKE_JS='const deps = require("./package.json").dependencies || {};
for (const m of ["serialport", "onoff"]) if (deps[m]) require(m);'

stage_release() {
  local rel=$1 dest="$R_RELEASES/$1" tmp="$R_RELEASES/.$1.partial" p
  if [ -f "$dest/$COMPLETE_MARK" ]; then
    say "release $rel is already installed"
    return 0
  fi
  [ -e "$dest" ] && act rm -rf "$dest"
  [ -e "$tmp" ] && act rm -rf "$tmp"
  act mkdir -p "$tmp/dist" "$tmp/agent/live"
  for p in "${RELEASE_PATHS[@]}"; do
    if [ -e "$SRC_DIR/$p" ]; then act cp -a "$SRC_DIR/$p" "$tmp/$p"; fi
  done
  # --ignore-scripts: the package's own `prepare` compiles TypeScript, which is not installed here
  # (dist/ is already built). `npm rebuild` then runs the dependencies' install scripts: the
  # native builds of epoll and @serialport/bindings-cpp, for this board's CPU.
  act env -C "$tmp" "$NPM" ci --omit=dev --ignore-scripts --no-audit --no-fund
  act env -C "$tmp" "$NPM" rebuild
  act env -C "$tmp" "$NODE" -e "$SMOKE_JS"
  act touch "$tmp/$COMPLETE_MARK"
  act mv -T "$tmp" "$dest"
}

current_release() {
  local t
  t=$(readlink "$R_OPT/current" 2>/dev/null || true)
  printf '%s' "${t#releases/}"
}

previous_release() {
  local t
  t=$(readlink "$R_OPT/previous" 2>/dev/null || true)
  printf '%s' "${t#releases/}"
}

# Where the files of release $1 are read from: the installed copy, or the source tree in a dry run
# (where nothing was staged).
release_dir() {
  if [ -d "$R_RELEASES/$1" ]; then printf '%s' "$R_RELEASES/$1"; else printf '%s' "$SRC_DIR"; fi
}

# The release must accept the config before it may run it.
check_config_with() {
  local rel=$1 cfg="$ROOT$ETC/turnwise.yaml"
  if [ ! -f "$cfg" ]; then
    say "no $ETC/turnwise.yaml yet: the service will not be started"
    return 0
  fi
  if ! act "$NODE" "$(release_dir "$rel")/dist/agent/cli/main.js" check-config "$cfg"; then
    die "release $rel rejects $ETC/turnwise.yaml (see the lines above); the running release was left in place" \
      "fix the config for the new release and run install.sh again"
  fi
}

switch_to() {
  local rel=$1 cur
  cur=$(current_release)
  if [ "$cur" = "$rel" ]; then
    say "current release is already $rel"
    return 0
  fi
  if [ -n "$cur" ]; then act ln -sfn "releases/$cur" "$R_OPT/previous"; fi
  act ln -sfn "releases/$rel" "$R_OPT/.current.new"
  act mv -T "$R_OPT/.current.new" "$R_OPT/current"
  CHANGED=1
}

prune_releases() {
  local cur prev n=0 d name
  cur=$(current_release)
  prev=$(previous_release)
  [ -d "$R_RELEASES" ] || return 0
  # Newest first; current and previous are never removed and do not count against --keep.
  while IFS= read -r d; do
    name=${d##*/}
    case "$name" in .*) continue ;; esac
    if [ "$name" = "$cur" ] || [ "$name" = "$prev" ]; then continue; fi
    n=$((n + 1))
    if [ "$n" -gt "$KEEP" ]; then act rm -rf "$d"; fi
  done < <(find "$R_RELEASES" -mindepth 1 -maxdepth 1 -type d -printf '%T@ %p\n' | sort -rn | cut -d' ' -f2-)
}

# ---- system files ------------------------------------------------------------------------------
udev_ids() {
  # The board's USB ids: from --daq-usb-id, else from the rules already installed.
  local id="$DAQ_USB_ID" v p
  if [ -n "$id" ]; then
    printf '%s' "${id,,}"
    return 0
  fi
  if [ -f "$ROOT$UDEV_DAQ" ]; then
    v=$(sed -n 's/.*ATTRS{idVendor}=="\([0-9a-f]\{4\}\)".*/\1/p' "$ROOT$UDEV_DAQ" | head -n1)
    p=$(sed -n 's/.*ATTRS{idProduct}=="\([0-9a-f]\{4\}\)".*/\1/p' "$ROOT$UDEV_DAQ" | head -n1)
    if [ -n "$v" ] && [ -n "$p" ] && [ "$v:$p" != "$PLACEHOLDER_USB_ID" ]; then printf '%s:%s' "$v" "$p"; fi
  fi
}

install_system_files() {
  local dir ids rules node_conf
  dir=$(release_dir "$1")

  put_file "$dir/deploy/turnwise.service" "$UNIT" 0644
  local unit_changed=$CHANGED

  # The unit runs /usr/bin/node; a Node.js elsewhere gets a drop-in with the same command line.
  if [ "$NODE" != /usr/bin/node ]; then
    node_conf=$(tmpfile)
    { printf '# Written by install.sh: Node.js is at %s\n[Service]\nExecStart=\n' "$NODE"
      sed -n "s#^ExecStart=/usr/bin/node #ExecStart=$NODE #p" "$dir/deploy/turnwise.service"
      printf 'ExecStopPost=\n'
      sed -n "s#^ExecStopPost=-/usr/bin/node #ExecStopPost=-$NODE #p" "$dir/deploy/turnwise.service"; } >"$node_conf"
    put_file "$node_conf" "$UNIT_D/10-node.conf" 0644
  elif [ -e "$ROOT$UNIT_D/10-node.conf" ]; then
    remove "$UNIT_D/10-node.conf"
    CHANGED=1
  fi

  ids=$(udev_ids)
  rules=$(tmpfile)
  if [ -n "$ids" ]; then
    sed -e "s/ATTRS{idVendor}==\"${PLACEHOLDER_USB_ID%%:*}\"/ATTRS{idVendor}==\"${ids%%:*}\"/" \
      -e "s/ATTRS{idProduct}==\"${PLACEHOLDER_USB_ID##*:}\"/ATTRS{idProduct}==\"${ids##*:}\"/" "$dir/deploy/udev/70-turnwise-daq.rules" >"$rules"
    say "acquisition board USB id: $ids -> /dev/turnwise-daq"
  else
    cat "$dir/deploy/udev/70-turnwise-daq.rules" >"$rules"
    warn "no USB id for the acquisition board: /dev/turnwise-daq will not appear. Run again with --daq-usb-id VVVV:PPPP (see lsusb)."
  fi
  local before=$CHANGED
  CHANGED=0
  put_file "$rules" "$UDEV_DAQ" 0644
  put_file "$dir/deploy/udev/99-turnwise-gpio.rules" "$UDEV_GPIO" 0644
  if [ "$CHANGED" = 1 ]; then
    if ! { sys udevadm control --reload-rules && sys udevadm trigger --action=change --subsystem-match=tty --subsystem-match=gpio; }; then
      warn "udev did not reload (not running here: a container or an image build?); the rules apply from the next boot"
    fi
  fi
  CHANGED=$((before | CHANGED))

  if [ "$NO_JOURNALD" = 0 ]; then
    before=$CHANGED
    CHANGED=0
    put_file "$dir/deploy/journald-turnwise.conf" "$JOURNALD_CONF" 0644
    if [ "$CHANGED" = 1 ]; then sys systemctl restart systemd-journald.service; fi
    CHANGED=$before # the agent need not restart for this
    say "journal: kept on disk from now on (Storage=persistent in $JOURNALD_CONF); Raspberry Pi OS keeps it in RAM by default, so the log before a reboot would be lost"
  else
    warn "journald left as it is (--no-journald-limits): Raspberry Pi OS keeps the journal in RAM by default, so its lines are lost at every reboot"
  fi
  say "events: turnwise also keeps every event under its state_dir (bounded by event_log.max_mb); after a reboot read them with: turnwise events --config $ETC/turnwise.yaml --since 24h"

  if [ ! -d "$ROOT$ETC" ]; then act install -d -m 0750 "$ROOT$ETC"; fi
  if [ "$(stat -c %U:%G "$ROOT$ETC" 2>/dev/null || true)" != root:turnwise ]; then sys chown root:turnwise "$ROOT$ETC"; fi
  put_file "$dir/config/example.yaml" "$ETC/turnwise.yaml.example" 0644
  # The live page's first token (operator role), made once and never replaced: the config's live
  # section names it (docs/live-page.md, "Opening it"); its holder reads it with
  # `sudo cat`. Readable by the service user only, as the agent requires of secret files.
  if [ ! -e "$ROOT$ETC/live-operator-token" ]; then
    local tok
    tok=$(tmpfile)
    head -c 32 /dev/urandom | base64 -w0 | tr '+/' '-_' | tr -d '=' >"$tok"
    printf '\n' >>"$tok"
    act install -m 0600 "$tok" "$ROOT$ETC/live-operator-token"
    sys chown turnwise:turnwise "$ROOT$ETC/live-operator-token"
  fi

  if [ "$(readlink "$ROOT$CLI_LINK" 2>/dev/null || true)" != "$OPT/current/dist/agent/cli/main.js" ]; then
    act mkdir -p "$ROOT${CLI_LINK%/*}"
    act ln -sfn "$OPT/current/dist/agent/cli/main.js" "$ROOT$CLI_LINK"
  fi

  if [ "$unit_changed" = 1 ] || [ "$CHANGED" = 1 ]; then sys systemctl daemon-reload; fi
  enable_unit
}

enable_unit() {
  if [ -n "$ROOT" ]; then
    # Offline: creates the multi-user.target.wants link inside the image.
    if command -v systemctl >/dev/null; then
      act systemctl --root="$ROOT" enable turnwise.service
    else
      warn "systemctl not found: run 'systemctl enable turnwise.service' on the installed system"
    fi
  elif [ "$DRY_RUN" = 1 ] || ! systemctl is-enabled --quiet turnwise.service 2>/dev/null; then
    sys systemctl enable turnwise.service
  else
    say "turnwise.service is enabled"
  fi
}

start_service() {
  local prev
  prev=$(previous_release)
  if [ ! -f "$ROOT$ETC/turnwise.yaml" ]; then
    say ""
    say "Installed, enabled, not started: there is no config yet."
    say "  1. write $ETC/turnwise.yaml (start from $ETC/turnwise.yaml.example, which describes an invented fan)"
    say "  2. turnwise check-config $ETC/turnwise.yaml"
    say "  3. systemctl start turnwise && journalctl -u turnwise -f"
    return 0
  fi
  if [ "$CHANGED" = 0 ]; then
    say "nothing changed; the service was left as it is"
    return 0
  fi
  # Type=notify: restart returns once the agent reported READY=1, or fails.
  if ! sys systemctl restart turnwise.service; then
    die "turnwise.service did not start" "journalctl -u turnwise -n 50 shows why${prev:+; deploy/install.sh --rollback goes back to $prev}"
  fi
  say "turnwise.service started; journalctl -u turnwise -f follows its log"
}

# ---- modes -------------------------------------------------------------------------------------
do_install() {
  preflight_system
  [ "$DRY_RUN" = 1 ] && say "dry run: nothing is changed"
  check_node
  check_source
  ensure_packages
  ensure_user
  local rel
  rel=$(release_name)
  say "release $rel from $SRC_DIR"
  if [ ! -d "$R_RELEASES" ]; then act mkdir -p "$R_RELEASES"; fi
  stage_release "$rel"
  check_config_with "$rel"
  switch_to "$rel"
  install_system_files "$rel"
  start_service
  prune_releases
  if [ "$DRY_RUN" = 0 ]; then say "done: current release $(current_release)"; fi
}

do_rollback() {
  preflight_system
  [ "$DRY_RUN" = 1 ] && say "dry run: nothing is changed"
  check_node
  local target=${ROLLBACK_TO:-$(previous_release)}
  target=${target#releases/}
  [ -n "$target" ] || die "no previous release to go back to" "deploy/install.sh --list shows the installed releases; name one: --rollback RELEASE"
  [ -f "$R_RELEASES/$target/$COMPLETE_MARK" ] || die "release '$target' is not installed (or incomplete)" "deploy/install.sh --list shows the installed releases"
  say "rolling back from $(current_release) to $target"
  check_config_with "$target"
  switch_to "$target"
  install_system_files "$target"
  start_service
}

do_list() {
  local cur prev d name mark
  cur=$(current_release)
  prev=$(previous_release)
  [ -d "$R_RELEASES" ] || { say "no releases installed under $OPT"; return 0; }
  while IFS= read -r d; do
    name=${d##*/}
    case "$name" in .*) continue ;; esac
    mark=""
    [ "$name" = "$cur" ] && mark=" (current)"
    [ "$name" = "$prev" ] && mark=" (previous)"
    [ -f "$d/$COMPLETE_MARK" ] || mark="$mark (incomplete)"
    say "$name$mark"
  done < <(find "$R_RELEASES" -mindepth 1 -maxdepth 1 -type d -printf '%T@ %p\n' | sort -rn | cut -d' ' -f2-)
}

do_uninstall() {
  preflight_system
  [ "$DRY_RUN" = 1 ] && say "dry run: nothing is changed"
  if [ -n "$ROOT" ]; then
    if [ -e "$ROOT$UNIT" ] && command -v systemctl >/dev/null; then act systemctl --root="$ROOT" disable turnwise.service; fi
  elif [ -e "$UNIT" ]; then
    sys systemctl disable --now turnwise.service || true
  fi
  remove "$UNIT"
  remove "$UNIT_D"
  remove "$UDEV_DAQ"
  remove "$UDEV_GPIO"
  sys udevadm control --reload-rules || true
  if [ -e "$ROOT$JOURNALD_CONF" ]; then
    remove "$JOURNALD_CONF"
    sys systemctl restart systemd-journald.service
  fi
  remove "$CLI_LINK"
  remove "$OPT"
  sys systemctl daemon-reload
  if [ "$PURGE" = 1 ]; then
    remove "$ETC"
    remove "$STATE"
    if getent passwd turnwise >/dev/null; then sys userdel turnwise; fi
  else
    say "kept $ETC (config) and $STATE (state); --uninstall --purge removes them and the user turnwise"
  fi
}

case "$MODE" in
  install) do_install ;;
  rollback) do_rollback ;;
  list) do_list ;;
  uninstall) do_uninstall ;;
esac
