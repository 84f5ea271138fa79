//! The states a lot is shown in on the lift map: the one [`DisplayState`] of the ledger,
//! under the name the charts use. Its code, label, mark and urgency are defined in
//! `crate::domain`; its paint in [`super::palette::state_style`].

pub use crate::domain::DisplayState as MapState;
