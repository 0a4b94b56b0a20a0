#!/bin/bash
# CPU share of a command under a 1 kHz UDP attitude feed, by the operating
# system's own accounting (utime + stime from /proc/PID/stat, fields 14 and
# 15, in clock ticks). Usage:
#   benches/tools/cpu_share.sh SECONDS CAPTURE CMD...
# e.g. benches/tools/cpu_share.sh 20 /tmp/capture.bin \
#        ./target/release/cagehand watch --headless --link udp:127.0.0.1:14550
# For the screens, start `cagehand watch --link udp:127.0.0.1:14550` in tmux
# and use its pid the same way.
set -eu
secs=$1; cap=$2; shift 2
here=$(dirname "$0")
"$@" > /dev/null 2>&1 &
pid=$!
sleep 1
python3 "$here/udp_1khz.py" "$cap" 14550 $((secs + 2)) &
sender=$!
sleep 1
read -r a b < <(awk '{print $14, $15}' "/proc/$pid/stat")
sleep "$secs"
read -r c d < <(awk '{print $14, $15}' "/proc/$pid/stat")
ticks=$(( (c - a) + (d - b) ))
echo "$ticks ticks in $secs s: $(awk -v t="$ticks" -v s="$secs" -v h="$(getconf CLK_TCK)" 'BEGIN { printf "%.2f%% of a core", 100 * t / (s * h) }')"
wait "$sender"
kill -TERM "$pid" 2>/dev/null || true
wait "$pid" 2>/dev/null || true
