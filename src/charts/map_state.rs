//! The states a lot can be in on the lift map, their words, marks and urgency.

/// Where a lot stands, as the map shows it.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Hash)]
pub enum MapState {
    /// Being built and tested.
    Open,
    /// Built, but fewer tests than the clause asks for.
    OwedTests,
    /// At least one counted test fails the clause.
    Failing,
    /// Handed to the client engineer for review.
    Submitted,
    /// Accepted by the client engineer.
    Accepted,
    /// Sent back for rework.
    Rejected,
    /// End-of-lift certificate issued.
    Certified,
}

impl MapState {
    /// Every state, in the order a lot usually passes through them (legend order).
    pub const ALL: [MapState; 7] = [
        MapState::Open,
        MapState::OwedTests,
        MapState::Failing,
        MapState::Submitted,
        MapState::Accepted,
        MapState::Rejected,
        MapState::Certified,
    ];

    /// Stable token for ids, classes and URLs.
    pub fn code(self) -> &'static str {
        match self {
            MapState::Open => "open",
            MapState::OwedTests => "owed",
            MapState::Failing => "failing",
            MapState::Submitted => "submitted",
            MapState::Accepted => "accepted",
            MapState::Rejected => "rejected",
            MapState::Certified => "certified",
        }
    }

    /// Words shown to people.
    pub fn label(self) -> &'static str {
        match self {
            MapState::Open => "open",
            MapState::OwedTests => "tests owed",
            MapState::Failing => "failing",
            MapState::Submitted => "submitted",
            MapState::Accepted => "accepted",
            MapState::Rejected => "rejected",
            MapState::Certified => "certified",
        }
    }

    /// One-letter mark drawn on wide enough lots so the state reads without colour.
    pub fn mark(self) -> &'static str {
        match self {
            MapState::Open => "O",
            MapState::OwedTests => "T",
            MapState::Failing => "F",
            MapState::Submitted => "S",
            MapState::Accepted => "A",
            MapState::Rejected => "R",
            MapState::Certified => "C",
        }
    }

    /// How much a state needs attention, used to pick what an aggregated cell shows:
    /// failing (6) > rejected (5) > tests owed (4) > open (3) > submitted (2) > accepted (1) > certified (0).
    pub fn severity(self) -> u8 {
        match self {
            MapState::Failing => 6,
            MapState::Rejected => 5,
            MapState::OwedTests => 4,
            MapState::Open => 3,
            MapState::Submitted => 2,
            MapState::Accepted => 1,
            MapState::Certified => 0,
        }
    }

    /// Position in [`MapState::ALL`], for per-state counters.
    pub(super) fn index(self) -> usize {
        match self {
            MapState::Open => 0,
            MapState::OwedTests => 1,
            MapState::Failing => 2,
            MapState::Submitted => 3,
            MapState::Accepted => 4,
            MapState::Rejected => 5,
            MapState::Certified => 6,
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn severity_orders_states_as_documented() {
        let mut states = MapState::ALL.to_vec();
        states.sort_by_key(|s| std::cmp::Reverse(s.severity()));
        assert_eq!(
            states,
            vec![
                MapState::Failing,
                MapState::Rejected,
                MapState::OwedTests,
                MapState::Open,
                MapState::Submitted,
                MapState::Accepted,
                MapState::Certified
            ]
        );
    }

    #[test]
    fn marks_and_codes_are_unique() {
        for (i, a) in MapState::ALL.iter().enumerate() {
            for b in &MapState::ALL[i + 1..] {
                assert_ne!(a.mark(), b.mark());
                assert_ne!(a.code(), b.code());
                assert_ne!(a.label(), b.label());
            }
            assert!((1..=2).contains(&a.mark().chars().count()));
        }
    }
}
