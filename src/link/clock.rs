//! The link clock's limits, shared by every reader: how often silence is
//! marked by a tick, how long a silence gets ticks, and the largest time a
//! sample may carry. Times beyond it cannot be stepped by a tick (adding
//! [`TICK_S`] to a double of 2^51 or more no longer changes it), so a loop
//! that walks the clock tick by tick would never end.

/// Longest silence between messages from a reader, in link seconds.
pub const TICK_S: f64 = 0.25;

/// Longest silence that gets ticks, in link seconds: beyond it the clock
/// jumped (a reboot, a garbled time) and ticks would only flood the
/// consumer; stale shows long before.
pub const MAX_GAP_TICKS_S: f64 = 600.0;

/// Largest magnitude of a sample time, seconds (2^50, about 35 million
/// years): up to here a double steps by [`TICK_S`] exactly.
pub const MAX_TIME_S: f64 = 1_125_899_906_842_624.0;

/// Whether a time (seconds) is one the link clock can step through.
pub fn time_in_range(t_s: f64) -> bool {
    t_s.is_finite() && t_s.abs() <= MAX_TIME_S
}

/// The ticks for a silence from `from_s` to `to_s`: every [`TICK_S`] after
/// `from_s` while more than a tick is left before `to_s`, over at most
/// [`MAX_GAP_TICKS_S`]. Always a bounded number of strictly increasing
/// times, whatever the inputs (NaN, infinities, times a tick cannot step).
pub fn silence_ticks(from_s: f64, to_s: f64) -> SilenceTicks {
    let gap = to_s - from_s;
    let count = if time_in_range(from_s) && gap > TICK_S {
        let span = gap.min(MAX_GAP_TICKS_S);
        // k = 1.. while span - (k - 1) * TICK_S > TICK_S, i.e. k < span / TICK_S.
        ((span / TICK_S).ceil() as u64).saturating_sub(1)
    } else {
        0
    };
    SilenceTicks {
        from_s,
        k: 0,
        count,
    }
}

/// The iterator [`silence_ticks`] returns.
#[derive(Debug, Clone)]
pub struct SilenceTicks {
    from_s: f64,
    k: u64,
    count: u64,
}

impl Iterator for SilenceTicks {
    type Item = f64;
    fn next(&mut self) -> Option<f64> {
        if self.k >= self.count {
            return None;
        }
        self.k += 1;
        Some(self.from_s + self.k as f64 * TICK_S)
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn ticks_fill_a_silence_and_stop_short_of_its_end() {
        let t: Vec<f64> = silence_ticks(1.0, 2.0).collect();
        assert_eq!(t, vec![1.25, 1.5, 1.75]);
        let t: Vec<f64> = silence_ticks(1.0, 2.1).collect();
        assert_eq!(t, vec![1.25, 1.5, 1.75, 2.0]);
        assert_eq!(silence_ticks(1.0, 1.2).count(), 0);
        assert_eq!(silence_ticks(2.0, 1.0).count(), 0);
    }

    #[test]
    fn ticks_are_bounded_whatever_the_times() {
        let cap = (MAX_GAP_TICKS_S / TICK_S) as usize;
        assert_eq!(silence_ticks(0.0, 1e18).count(), cap - 1);
        assert_eq!(silence_ticks(0.0, f64::INFINITY).count(), cap - 1);
        assert_eq!(silence_ticks(f64::NAN, 5.0).count(), 0);
        assert_eq!(silence_ticks(0.0, f64::NAN).count(), 0);
        assert_eq!(silence_ticks(3e15, 4e15).count(), 0);
        // At the limit, each tick is a new time.
        let t: Vec<f64> = silence_ticks(MAX_TIME_S, MAX_TIME_S + 1.0).collect();
        assert_eq!(t.len(), 3);
        assert!(t.windows(2).all(|w| w[1] > w[0]) && t[0] > MAX_TIME_S);
    }

    #[test]
    fn the_time_limit_is_where_a_tick_still_steps() {
        // IEEE 754 binary64: the spacing of doubles in [2^50, 2^51) is
        // 2^-2 = 0.25, so the tick is exact there; at 2^52 it is 1.
        const { assert!(MAX_TIME_S + TICK_S > MAX_TIME_S) };
        assert_eq!(MAX_TIME_S, 2f64.powi(50));
        assert_eq!(2f64.powi(52) + TICK_S, 2f64.powi(52));
        assert!(!time_in_range(3e15));
        assert!(time_in_range(-1e15));
    }
}
