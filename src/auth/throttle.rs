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

/// Seconds still to wait, given the wait owed and the whole seconds between the stored
/// times of the last failure and now.
///
/// Stored times have whole seconds, so the time gone is known only to within one second.
/// Counting it one second short means the wait served is never less than the rule's:
/// with a 1 s wait, an attempt 0.2 s after a failure stamped late in the previous second
/// would otherwise read as a full second gone and pass.
pub fn still_to_wait(wait: i64, whole_secs_since_last: i64) -> i64 {
    if wait <= 0 {
        return 0;
    }
    let surely_gone = (whole_secs_since_last - 1).max(0);
    (wait - surely_gone).max(0)
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

    #[test]
    fn a_wait_is_never_shortened_by_whole_second_stamps() {
        // No wait owed: nothing to wait, whatever the stamps say.
        assert_eq!(still_to_wait(0, 0), 0);
        // A 1 s wait: stamps one second apart may be 0.01 s apart, so still wait.
        assert_eq!(still_to_wait(1, 0), 1);
        assert_eq!(still_to_wait(1, 1), 1);
        // Two whole seconds between stamps is at least one real second.
        assert_eq!(still_to_wait(1, 2), 0);
        assert_eq!(still_to_wait(8, 5), 4);
        assert_eq!(still_to_wait(8, 100), 0);
    }
}
