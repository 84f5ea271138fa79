//! Pure reduction library: turns lab and field readings into densities, curves,
//! verdicts and lot decisions. No I/O lives here; every formula names its source.

/// Version of the reduction rules, stored beside every reduced field test.
pub const REDUCTION_VERSION: &str = "1.0.0";

pub mod acceptance;
pub mod control_chart;
pub mod curve;
pub mod curve_quality;
pub mod drift;
pub mod field;
pub mod frequency;
pub mod instrument_check;
pub mod instruments;
pub mod lab;
pub mod one_point;
pub mod oversize;
pub mod plausibility;
pub mod pwl;
pub mod quantities;
pub mod rounding;
pub mod sampling;
pub mod site;
pub mod split;
pub mod verdict;
pub mod voids;
pub mod water;

pub use quantities::*;
