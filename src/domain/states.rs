//! A lot's stored state with the moves allowed between states, and the state a lot is
//! shown in (pages, lift map, legend, export): one definition of each code, label and mark.

use serde::{Deserialize, Serialize};

use super::codes::stored_code;

/// Where a lot stands in its review (the `state` column of `lots`, and both ends of a
/// `lot_transitions` row).
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash, Serialize, Deserialize, utoipa::ToSchema)]
#[serde(rename_all = "snake_case")]
pub enum LotState {
    /// Being built and tested.
    Open,
    /// Handed to the client engineer for review.
    Submitted,
    /// Accepted by the client engineer (frozen until reopened).
    Accepted,
    /// Sent back for rework.
    Rejected,
}

stored_code!(LotState, "lot state", {
    Open => "open",
    Submitted => "submitted",
    Accepted => "accepted",
    Rejected => "rejected",
});

impl LotState {
    /// The states a lot may move to from this one: submit (open or rejected → submitted),
    /// reject or accept (submitted → rejected / accepted), reopen (accepted → open).
    pub fn next_states(self) -> &'static [LotState] {
        match self {
            LotState::Open | LotState::Rejected => &[LotState::Submitted],
            LotState::Submitted => &[LotState::Rejected, LotState::Accepted],
            LotState::Accepted => &[LotState::Open],
        }
    }

    /// True when a lot in this state may move to `to`.
    pub fn may_become(self, to: LotState) -> bool {
        self.next_states().contains(&to)
    }

    /// True while the lot takes new tests, retests and a new curve (open, or rejected for
    /// rework).
    pub fn takes_tests(self) -> bool {
        matches!(self, LotState::Open | LotState::Rejected)
    }
}

/// How a judged lot is shown: its stored state, refined by what its tests say (an open lot
/// may be failing or owe tests; an accepted lot with a current certificate is certified).
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash, Serialize, Deserialize, utoipa::ToSchema)]
#[serde(rename_all = "snake_case")]
pub enum DisplayState {
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
    /// End-of-lift certificate issued and current.
    Certified,
}

stored_code!(DisplayState, "display state", {
    Open => "open",
    OwedTests => "owed_tests",
    Failing => "failing",
    Submitted => "submitted",
    Accepted => "accepted",
    Rejected => "rejected",
    Certified => "certified",
});

/// What, beyond its stored state, decides how a lot is shown.
#[derive(Debug, Clone, Copy, Default)]
pub struct Judged {
    /// The lot has a certificate and it is current.
    pub certificate_current: bool,
    /// The lot's counted tests fail it (a failing test awaits a retest and decides).
    pub failing: bool,
    /// Tests still owed by the frequency rule.
    pub owed: bool,
}

impl DisplayState {
    /// How a lot in `state` is shown, given what its report found.
    pub fn of(state: LotState, judged: Judged) -> Self {
        match state {
            LotState::Accepted if judged.certificate_current => DisplayState::Certified,
            LotState::Accepted => DisplayState::Accepted,
            LotState::Open if judged.failing => DisplayState::Failing,
            LotState::Open if judged.owed => DisplayState::OwedTests,
            LotState::Open => DisplayState::Open,
            LotState::Submitted => DisplayState::Submitted,
            LotState::Rejected => DisplayState::Rejected,
        }
    }

    /// Short token for HTML ids, classes, `data-state` and SVG pattern ids.
    pub fn token(self) -> &'static str {
        match self {
            DisplayState::OwedTests => "owed",
            other => other.code(),
        }
    }

    /// Words shown to people.
    pub fn label(self) -> &'static str {
        match self {
            DisplayState::OwedTests => "tests owed",
            other => other.code(),
        }
    }

    /// One-letter mark drawn where the state is shown, so it reads without colour.
    pub fn mark(self) -> &'static str {
        match self {
            DisplayState::Open => "O",
            DisplayState::OwedTests => "T",
            DisplayState::Failing => "F",
            DisplayState::Submitted => "S",
            DisplayState::Accepted => "A",
            DisplayState::Rejected => "R",
            DisplayState::Certified => "C",
        }
    }

    /// How much a state needs attention, used to pick what an aggregated map cell shows:
    /// failing (6) > rejected (5) > tests owed (4) > open (3) > submitted (2) > accepted (1) > certified (0).
    pub fn severity(self) -> u8 {
        match self {
            DisplayState::Failing => 6,
            DisplayState::Rejected => 5,
            DisplayState::OwedTests => 4,
            DisplayState::Open => 3,
            DisplayState::Submitted => 2,
            DisplayState::Accepted => 1,
            DisplayState::Certified => 0,
        }
    }

    /// Position in [`DisplayState::ALL`] (the legend's order, the order a lot usually
    /// passes through the states), for per-state counters.
    pub fn index(self) -> usize {
        self as usize
    }
}

/// A lot shown by its stored state alone (a lot not judged, e.g. beside a planned split).
impl From<LotState> for DisplayState {
    fn from(state: LotState) -> Self {
        DisplayState::of(state, Judged::default())
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn transitions_are_the_review_cycle() {
        use LotState::*;
        let allowed = [
            (Open, Submitted),
            (Rejected, Submitted),
            (Submitted, Rejected),
            (Submitted, Accepted),
            (Accepted, Open),
        ];
        for from in &LotState::ALL {
            for to in &LotState::ALL {
                assert_eq!(
                    from.may_become(*to),
                    allowed.contains(&(*from, *to)),
                    "{from} -> {to}"
                );
            }
        }
        assert!(Open.takes_tests() && Rejected.takes_tests());
        assert!(!Submitted.takes_tests() && !Accepted.takes_tests());
    }

    #[test]
    fn display_state_follows_the_report() {
        let j = |certificate_current, failing, owed| Judged {
            certificate_current,
            failing,
            owed,
        };
        assert_eq!(
            DisplayState::of(LotState::Accepted, j(true, false, false)),
            DisplayState::Certified
        );
        assert_eq!(
            DisplayState::of(LotState::Accepted, j(false, true, true)),
            DisplayState::Accepted
        );
        assert_eq!(
            DisplayState::of(LotState::Open, j(false, true, true)),
            DisplayState::Failing
        );
        assert_eq!(
            DisplayState::of(LotState::Open, j(false, false, true)),
            DisplayState::OwedTests
        );
        assert_eq!(
            DisplayState::of(LotState::Open, j(false, false, false)),
            DisplayState::Open
        );
        // A rejected lot stays shown as rejected, whatever its tests say.
        assert_eq!(
            DisplayState::of(LotState::Rejected, j(false, true, true)),
            DisplayState::Rejected
        );
        assert_eq!(
            DisplayState::of(LotState::Submitted, j(true, true, true)),
            DisplayState::Submitted
        );
    }

    #[test]
    fn severity_orders_states_as_documented() {
        let mut states = DisplayState::ALL.to_vec();
        states.sort_by_key(|s| std::cmp::Reverse(s.severity()));
        use DisplayState::*;
        assert_eq!(
            states,
            vec![
                Failing, Rejected, OwedTests, Open, Submitted, Accepted, Certified
            ]
        );
    }

    #[test]
    fn marks_tokens_codes_and_labels_are_unique() {
        let all = DisplayState::ALL;
        for (i, a) in all.iter().enumerate() {
            assert_eq!(a.index(), i);
            assert_eq!(serde_json::to_value(a).unwrap(), a.code());
            for b in &all[i + 1..] {
                assert_ne!(a.mark(), b.mark());
                assert_ne!(a.code(), b.code());
                assert_ne!(a.token(), b.token());
                assert_ne!(a.label(), b.label());
            }
            assert!((1..=2).contains(&a.mark().chars().count()));
        }
    }
}
