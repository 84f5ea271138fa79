//! The ledger's stored codes as typed values: a lot's state and how it is shown, a test's
//! standing, a field test's method and a clause's acceptance rule; and the stored form
//! of [`crate::auth::Role`] (a membership's or a token's role).
//!
//! Why here and not in `reduction/`: these are values of the records (what a row says),
//! not math. They are decoded once where rows leave `src/db/` (each implements sqlx's
//! `Type`/`Encode`/`Decode` for SQLite and PostgreSQL alike, so a row struct carries the
//! enum and an unknown stored code fails the read naming the column and the code) and pages, charts,
//! the PDF and the API compare enums, never strings. `reduction/` stays pure and free of
//! sqlx (it is also compiled to WebAssembly); where it has its own richer enum
//! ([`crate::reduction::acceptance::AcceptanceRule`], `TestStanding`) the code here
//! converts to or from it.
//!
//! Serde uses the stored codes (snake_case), so JSON answers are unchanged.

mod codes;
mod effort;
mod states;

pub(crate) use codes::stored_as_text;
pub use codes::{
    Approval, CurveStatus, Method, MoistureBasis, MoistureMode, Rule, Standing, TestResult,
    UnknownCode,
};
pub use effort::{ClauseEffort, LabEffort};
pub use states::{DisplayState, Judged, LotState};
