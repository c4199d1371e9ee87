#!/bin/sh
# tests/io/check_unit.sh UNIT SCRATCH - check systemd/modeband.service with
# systemd-analyze verify (systemd's own unit parser), with ExecStart pointed
# at /bin/true since the program need not be installed; and check that the
# directives the station relies on are there. Exit 77 (skipped) when
# systemd-analyze is not installed.
set -eu
unit=$1 scratch=$2
rm -rf "$scratch"
mkdir -p "$scratch"
for d in Type=notify WatchdogSec= Restart=on-failure NoNewPrivileges=yes \
         ProtectSystem=strict ProtectHome=yes PrivateTmp=yes \
         'DeviceAllow=char-video4linux rw' SupplementaryGroups=video \
         RestrictAddressFamilies= StateDirectory=modeband \
         LogsDirectory=modeband ConfigurationDirectory=modeband \
         User=modeband '#AmbientCapabilities=CAP_NET_BIND_SERVICE' \
         'not a safety device'; do
    if ! grep -q -- "$d" "$unit"; then
        echo "check_unit: $unit lacks '$d'" >&2
        exit 1
    fi
done
if ! command -v systemd-analyze >/dev/null 2>&1; then
    echo "check_unit: systemd-analyze not installed; skipped"
    exit 77
fi
sed 's|^ExecStart=/usr/local/bin/modeband|ExecStart=/bin/true|' "$unit" \
    > "$scratch/modeband.service"
out=$(systemd-analyze verify "$scratch/modeband.service" 2>&1) || {
    echo "$out" >&2
    exit 1
}
if [ -n "$out" ]; then
    echo "$out" >&2
    exit 1
fi
echo "check_unit: systemd-analyze verify reports nothing"
rm -rf "$scratch"
