#!/usr/bin/env bash
# Stop the daemons started by up.sh, by the PIDs it recorded (nothing else is touched).
set -uo pipefail
DIR=$(realpath -m "${1:?usage: down.sh DIR}")
[ -f "$DIR/pids" ] || exit 0
tac "$DIR/pids" | while read -r name pid; do
    if kill -0 "$pid" 2>/dev/null; then
        kill "$pid"
        for _ in $(seq 50); do kill -0 "$pid" 2>/dev/null || break; sleep 0.1; done
        kill -0 "$pid" 2>/dev/null && kill -9 "$pid"
        echo "stopped $name ($pid)"
    fi
done
: > "$DIR/pids"
if [ -f "$DIR/etc-link" ] && [ "$(readlink /etc/slurm/slurm.conf)" = "$(cat "$DIR/etc-link")" ]; then
    rm -f /etc/slurm/slurm.conf "$DIR/etc-link"
fi
