//! A clause's moisture window as the contract writes it (points of OMC, percent of OMC or an
//! absolute range of water content) and its optional air-voids maximum: checked when the
//! clause is made, read back as the reduction's limits.

use super::validate::number;
use crate::db;
use crate::domain::MoistureBasis;
use crate::error::{AppError, Result};
use crate::reduction::verdict::MoistureWindow;

/// The moisture terms of a clause body, as they arrive.
pub struct MoistureTermsInput {
    pub basis: Option<String>,
    pub below_pct: Option<f64>,
    pub above_pct: Option<f64>,
    pub low_pct: Option<f64>,
    pub high_pct: Option<f64>,
    pub max_air_voids_pct: Option<f64>,
}

/// The checked terms, as stored: points-of-OMC windows keep below/above (low/high empty); the
/// other forms keep low/high (below/above stored as 0 and never read).
#[derive(Debug, Clone, PartialEq)]
pub struct MoistureTerms {
    pub basis: MoistureBasis,
    pub below_pct: f64,
    pub above_pct: f64,
    pub low_pct: Option<f64>,
    pub high_pct: Option<f64>,
    pub max_air_voids_pct: Option<f64>,
}

fn required(field: &str, v: Option<f64>, basis: &str) -> Result<f64> {
    v.ok_or_else(|| {
        AppError::invalid(
            field,
            format!("is required when moisture_basis is \"{basis}\""),
        )
    })
}

fn absent(field: &str, v: Option<f64>, basis: &str) -> Result<()> {
    match v {
        Some(_) => Err(AppError::invalid(
            field,
            format!("does not apply when moisture_basis is \"{basis}\""),
        )),
        None => Ok(()),
    }
}

/// Low below high, each in its range.
fn low_high(
    input: &MoistureTermsInput,
    basis: &str,
    low_range: (f64, f64),
    high_range: (f64, f64),
) -> Result<(f64, f64)> {
    absent("moisture_below_pct", input.below_pct, basis)?;
    absent("moisture_above_pct", input.above_pct, basis)?;
    let low = required("moisture_low_pct", input.low_pct, basis)?;
    let high = required("moisture_high_pct", input.high_pct, basis)?;
    let low = number("moisture_low_pct", low, low_range.0, low_range.1, "%")?;
    let high = number("moisture_high_pct", high, high_range.0, high_range.1, "%")?;
    if low >= high {
        return Err(AppError::invalid(
            "moisture_high_pct",
            format!("{high} % must be above moisture_low_pct ({low} %)"),
        ));
    }
    Ok((low, high))
}

/// Checks the moisture window and air-voids terms of a clause body.
pub fn check(input: &MoistureTermsInput) -> Result<MoistureTerms> {
    let given = input.basis.as_deref().unwrap_or("points_of_omc").trim();
    let basis = MoistureBasis::parse_code(given).ok_or_else(|| {
        AppError::invalid(
            "moisture_basis",
            format!(
                "unknown moisture_basis '{given}'; use points_of_omc, percent_of_omc or absolute"
            ),
        )
    })?;
    let max_air_voids_pct = input
        .max_air_voids_pct
        .map(|v| number("max_air_voids_pct", v, 0.1, 30.0, "%"))
        .transpose()?;
    let code = basis.code();
    let (below_pct, above_pct, low_pct, high_pct) = match basis {
        MoistureBasis::PointsOfOmc => {
            absent("moisture_low_pct", input.low_pct, code)?;
            absent("moisture_high_pct", input.high_pct, code)?;
            let below = required("moisture_below_pct", input.below_pct, code)?;
            let above = required("moisture_above_pct", input.above_pct, code)?;
            (
                number("moisture_below_pct", below, 0.0, 20.0, "points")?,
                number("moisture_above_pct", above, 0.0, 20.0, "points")?,
                None,
                None,
            )
        }
        // w / OMC × 100: a window that does not contain 100 % would exclude the optimum itself.
        MoistureBasis::PercentOfOmc => {
            let (low, high) = low_high(input, code, (50.0, 100.0), (100.0, 200.0))?;
            (0.0, 0.0, Some(low), Some(high))
        }
        MoistureBasis::Absolute => {
            let (low, high) = low_high(input, code, (0.0, 100.0), (0.0, 100.0))?;
            (0.0, 0.0, Some(low), Some(high))
        }
    };
    Ok(MoistureTerms {
        basis,
        below_pct,
        above_pct,
        low_pct,
        high_pct,
        max_air_voids_pct,
    })
}

/// A stored clause's moisture window (an unknown stored basis already failed the row's read).
pub fn window_of(c: &db::clauses::Clause) -> anyhow::Result<MoistureWindow> {
    let bounds = || {
        c.moisture_low_pct.zip(c.moisture_high_pct).ok_or_else(|| {
            anyhow::anyhow!(
                "clause {} has a {} window without its bounds",
                c.id,
                c.moisture_basis
            )
        })
    };
    Ok(match c.moisture_basis {
        MoistureBasis::PointsOfOmc => MoistureWindow::PointsOfOmc {
            below_pct: c.moisture_below_pct,
            above_pct: c.moisture_above_pct,
        },
        MoistureBasis::PercentOfOmc => {
            let (low_pct, high_pct) = bounds()?;
            MoistureWindow::PercentOfOmc { low_pct, high_pct }
        }
        MoistureBasis::Absolute => {
            let (min_pct, max_pct) = bounds()?;
            MoistureWindow::Absolute { min_pct, max_pct }
        }
    })
}
