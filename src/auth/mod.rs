//! Who may do what: roles, the one permission table, passwords, secrets and throttling.
//!
//! Every route asks [`allows`] (through `http::caller`) before it reads or
//! changes a project's records. Membership is per project; an admin manages
//! projects and people but holds no project role unless granted one.

pub mod password;
pub mod secret;
pub mod throttle;

use serde::{Deserialize, Serialize};

/// A person's (or token's) role in one project.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize, utoipa::ToSchema)]
#[serde(rename_all = "snake_case")]
pub enum Role {
    /// Enters tests and retests.
    Technician,
    /// Everything a technician does, plus setup, voids and submitting lots.
    QcManager,
    /// Reads everything, accepts or rejects lots and issues certificates.
    ClientEngineer,
    /// Reads only.
    Viewer,
}

impl Role {
    /// Every role, for forms and tests.
    pub const ALL: [Role; 4] = [
        Role::Technician,
        Role::QcManager,
        Role::ClientEngineer,
        Role::Viewer,
    ];

    /// Stored code.
    pub fn code(self) -> &'static str {
        match self {
            Role::Technician => "technician",
            Role::QcManager => "qc_manager",
            Role::ClientEngineer => "client_engineer",
            Role::Viewer => "viewer",
        }
    }

    /// Reads a stored code.
    pub fn parse_code(s: &str) -> Option<Self> {
        Self::ALL.into_iter().find(|r| r.code() == s)
    }

    /// True when everything `self` may do, `holder` may do too (roles are parties,
    /// not a ladder: a QC manager's rights do not contain a client engineer's).
    pub fn within(self, holder: Role) -> bool {
        Action::ALL
            .into_iter()
            .all(|a| !allows(self, a) || allows(holder, a))
    }

    /// Words for people.
    pub fn label(self) -> &'static str {
        match self {
            Role::Technician => "site technician",
            Role::QcManager => "QC manager",
            Role::ClientEngineer => "client engineer",
            Role::Viewer => "viewer",
        }
    }
}

/// Something a caller may want to do inside a project.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Action {
    /// See the project's records.
    Read,
    /// Enter a field test or a retest (and preview one).
    EnterTests,
    /// Void a test with a reason.
    VoidTest,
    /// Create clauses, sources, lab tests, layers and lots; import files.
    ManageSetup,
    /// Submit a lot for review.
    SubmitLot,
    /// Accept or reject a submitted lot; issue certificates.
    ReviewLot,
    /// Create and revoke API tokens of the project (never for a role beyond one's own).
    ManageTokens,
    /// Download the project's handover archive (the client's copy of the whole record).
    TakeArchive,
}

impl Action {
    /// Every action, for the containment of roles.
    pub const ALL: [Action; 7] = [
        Action::Read,
        Action::EnterTests,
        Action::VoidTest,
        Action::ManageSetup,
        Action::SubmitLot,
        Action::ReviewLot,
        Action::ManageTokens,
    ];

    /// Words for a refusal message.
    pub fn label(self) -> &'static str {
        match self {
            Action::Read => "read this project",
            Action::EnterTests => "enter field tests",
            Action::VoidTest => "void tests",
            Action::ManageSetup => "change clauses, sources, lab curves, layers or lots",
            Action::SubmitLot => "submit lots",
            Action::ReviewLot => "accept or reject lots",
            Action::ManageTokens => "manage API tokens",
            Action::TakeArchive => "download the handover archive",
        }
    }
}

/// The permission table: may a holder of `role` do `action`?
pub fn allows(role: Role, action: Action) -> bool {
    use Action::*;
    use Role::*;
    match action {
        Read => true,
        EnterTests => matches!(role, Technician | QcManager),
        VoidTest | ManageSetup | SubmitLot => role == QcManager,
        ReviewLot | TakeArchive => role == ClientEngineer,
        // Each party keeps its own devices: tokens up to one's own role.
        ManageTokens => matches!(role, QcManager | ClientEngineer),
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn a_site_login_cannot_sign_a_lift_off_and_a_reviewer_cannot_enter_tests() {
        assert!(!allows(Role::Technician, Action::ReviewLot));
        assert!(!allows(Role::QcManager, Action::ReviewLot));
        assert!(allows(Role::ClientEngineer, Action::ReviewLot));
        assert!(!allows(Role::ClientEngineer, Action::EnterTests));
        assert!(!allows(Role::ClientEngineer, Action::VoidTest));
        assert!(!allows(Role::Viewer, Action::EnterTests));
        assert!(allows(Role::Viewer, Action::Read));
        assert!(allows(Role::Technician, Action::EnterTests));
        assert!(!allows(Role::Technician, Action::VoidTest));
    }

    #[test]
    fn roles_are_parties_not_a_ladder() {
        use Role::*;
        assert!(Technician.within(QcManager));
        assert!(Viewer.within(ClientEngineer));
        assert!(!ClientEngineer.within(QcManager), "no contractor can sign");
        assert!(!QcManager.within(ClientEngineer));
        assert!(!Technician.within(ClientEngineer));
        assert!(!QcManager.within(Technician));
        for r in Role::ALL {
            assert!(r.within(r));
        }
    }

    #[test]
    fn role_codes_round_trip() {
        for r in Role::ALL {
            assert_eq!(Role::parse_code(r.code()), Some(r));
        }
        assert_eq!(Role::parse_code("admin"), None);
    }
}
