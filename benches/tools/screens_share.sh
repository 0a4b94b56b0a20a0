#!/bin/bash
# CPU share of the screens, idle and under a 1 kHz UDP attitude feed, by the
# operating system's own accounting (utime + stime of the cagehand process
# from /proc/PID/stat, fields 14 and 15, in clock ticks). The screens run
# in a detached tmux session at 120x36; the process measured is the one
# tmux started in its pane (not the shell around it, which sleeps and
# would read as idle whatever the screens do). Usage:
#   benches/tools/screens_share.sh IDLE_SECONDS CAPTURE CAGEHAND
# e.g. benches/tools/screens_share.sh 60 /tmp/capture.bin ./target/release/cagehand
set -eu
idle=$1; cap=$2; bin=$(realpath "$3")
here=$(dirname "$0")
. "$here/ticks.sh"
sock=cagehand-share-$$
data=$(mktemp -d)
tmux -L "$sock" new -d -s s -x 120 -y 36 "exec env CAGEHAND_DATA=$data $bin watch --link udp:127.0.0.1:14550"
trap 'tmux -L "$sock" kill-server 2>/dev/null || true; rm -rf "$data"' EXIT
sleep 2
pid=$(tmux -L "$sock" display -p -t s '#{pane_pid}')
[ "$(readlink "/proc/$pid/exe")" = "$bin" ] || { echo "pane runs $(readlink "/proc/$pid/exe"), not $bin" >&2; exit 1; }
start=$(ticks_of "$pid")
sleep "$idle"
t=$(( $(ticks_of "$pid") - start ))
echo "idle: $t ticks in $idle s: $(share "$t" "$idle")"
python3 "$here/udp_1khz.py" "$cap" 14550 22 > /dev/null &
sender=$!
sleep 2
start=$(ticks_of "$pid")
sleep 20
t=$(( $(ticks_of "$pid") - start ))
echo "under the feed: $t ticks in 20 s: $(share "$t" 20); header: $(tmux -L "$sock" capture-pane -p -t s | sed -n 2p | grep -o '[0-9]*Hz' || echo '?')"
wait "$sender"
