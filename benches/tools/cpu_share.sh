#!/bin/bash
# CPU share of a command under a 1 kHz UDP attitude feed, by the operating
# system's own accounting (utime + stime from /proc/PID/stat, fields 14 and
# 15, in clock ticks). Usage:
#   benches/tools/cpu_share.sh SECONDS CAPTURE CMD...
# e.g. benches/tools/cpu_share.sh 20 /tmp/capture.bin \
#        ./target/release/cagehand watch --headless --link udp:127.0.0.1:14550
# For the screens, use screens_share.sh.
set -eu
secs=$1; cap=$2; shift 2
here=$(dirname "$0")
. "$here/ticks.sh"
"$@" > /dev/null 2>&1 &
pid=$!
sleep 1
python3 "$here/udp_1khz.py" "$cap" 14550 $((secs + 2)) &
sender=$!
sleep 1
start=$(ticks_of "$pid")
sleep "$secs"
ticks=$(( $(ticks_of "$pid") - start ))
echo "$ticks ticks in $secs s: $(share "$ticks" "$secs")"
wait "$sender"
kill -TERM "$pid" 2>/dev/null || true
wait "$pid" 2>/dev/null || true
