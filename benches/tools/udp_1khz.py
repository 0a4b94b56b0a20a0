# Send the attitude frames (ATTITUDE, ATTITUDE_QUATERNION) of a MAVLink capture
# to 127.0.0.1:PORT at 1000 frames a second, for measuring the CPU share of
# `cagehand watch` (DEVELOPERS.md, budget table). Usage:
#   python3 benches/tools/udp_1khz.py CAPTURE [PORT=14550] [SECONDS=60]
# The capture: `cargo run --release --example capture -- 11 > /tmp/capture.bin`.
import socket, sys, time
data = open(sys.argv[1], 'rb').read()
port = int(sys.argv[2]) if len(sys.argv) > 2 else 14550
secs = float(sys.argv[3]) if len(sys.argv) > 3 else 60
frames = []
i = 0
while i < len(data) and len(frames) < 20000:
    if data[i] == 0xFD and i + 10 <= len(data):
        n = data[i+1]; inc = data[i+2]
        size = 12 + n + (13 if inc & 1 else 0)
        msgid = data[i+7] | (data[i+8] << 8) | (data[i+9] << 16)
        if msgid in (30, 31):
            frames.append(data[i:i+size])
        i += size
    elif data[i] == 0xFE and i + 6 <= len(data):
        n = data[i+1]
        if data[i+5] in (30, 31):
            frames.append(data[i:i+8+n])
        i += 8 + n
    else:
        i += 1
s = socket.socket(socket.AF_INET, socket.SOCK_DGRAM)
t0 = time.monotonic(); sent = 0
while True:
    now = time.monotonic() - t0
    if now >= secs: break
    due = int(now * 1000)
    while sent < due:
        s.sendto(frames[sent % len(frames)], ('127.0.0.1', port)); sent += 1
    time.sleep(0.001)
print(f"sent {sent} frames in {time.monotonic()-t0:.1f} s ({len(frames)} distinct)", file=sys.stderr)
