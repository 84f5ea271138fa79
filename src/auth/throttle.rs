//! Slowing repeated failed sign-ins, per user name and per address.
//!
//! After [`FREE_FAILURES`] failures inside [`WINDOW_SECS`], each further attempt
//! must wait 2^(n − FREE_FAILURES) seconds after the last failure, capped at
//! [`MAX_WAIT_SECS`]. Failures older than the window stop counting, so the real
//! user is never locked out for longer than the cap.

/// Failures allowed without delay.
pub const FREE_FAILURES: i64 = 5;
/// How far back failures count.
pub const WINDOW_SECS: i64 = 15 * 60;
/// The longest wait imposed.
pub const MAX_WAIT_SECS: i64 = 60;

/// Seconds to wait after the last of `failures` recent failures.
pub fn wait_after(failures: i64) -> i64 {
    if failures < FREE_FAILURES {
        return 0;
    }
    let exp = (failures - FREE_FAILURES).min(10) as u32;
    2i64.pow(exp).min(MAX_WAIT_SECS)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn waits_grow_then_cap() {
        assert_eq!(wait_after(0), 0);
        assert_eq!(wait_after(4), 0);
        assert_eq!(wait_after(5), 1);
        assert_eq!(wait_after(6), 2);
        assert_eq!(wait_after(8), 8);
        assert_eq!(wait_after(50), MAX_WAIT_SECS);
    }
}
