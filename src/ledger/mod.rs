//! The ledger: what liftledger does with a request once it is read.
//!
//! Each function validates its input into reduction types (naming the field on
//! failure), reduces through `crate::reduction`, writes through `crate::db` in
//! one transaction together with its audit row, and returns what was stored.
//! HTTP handlers, pages, the demo loader and imports all call these functions.

pub mod accounts;
pub mod certificate_doc;
pub mod clauses;
pub mod field;
pub mod handle;
pub mod idempotent;
pub mod import;
pub mod instruments;
pub mod lab_curves;
pub mod lot_report;
pub mod lot_split;
pub mod lot_summaries;
pub mod moisture_terms;
pub mod moulds;
pub mod one_point;
pub mod overview;
pub mod people;
pub mod planning;
pub mod reference;
pub mod reopen;
pub mod repoint;
pub mod resample;
pub mod review;
pub mod sessions;
pub mod setup;
pub mod test_list;
pub mod test_writer;
pub mod tokens;
pub mod validate;
pub mod verify;
pub mod watch;

pub use handle::Ledger;

/// Who is making a change and from where; written to every audit row.
#[derive(Debug, Clone)]
pub struct Actor {
    /// The user name (or device token name) recorded as "who".
    pub name: String,
    /// Where the request came from (address, token or "cli").
    pub origin: String,
}

impl Actor {
    /// An actor for changes made by the command line or the demo loader.
    pub fn system(name: &str) -> Self {
        Self {
            name: name.to_string(),
            origin: "cli".to_string(),
        }
    }
}
