# Shared by cpu_share.sh and screens_share.sh (sourced, not run): a
# process's CPU time by the operating system's own accounting, utime +
# stime from /proc/PID/stat (fields 14 and 15, in clock ticks).

# Clock ticks PID has used so far.
ticks_of() {
    awk '{print $14 + $15}' "/proc/$1/stat"
}

# TICKS used in SECONDS as a share of one core.
share() {
    awk -v t="$1" -v s="$2" -v h="$(getconf CLK_TCK)" 'BEGIN { printf "%.2f%% of a core", 100 * t / (s * h) }'
}
