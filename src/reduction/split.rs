//! Dividing a stretch of a layer into lots of equal length.

/// Most lots one split may make (a guard against a typo such as "every 0.1 m").
pub const MAX_LOTS_PER_SPLIT: usize = 500;

/// Why a stretch cannot be split.
#[derive(Debug, Clone, PartialEq)]
pub enum SplitError {
    /// The end is not after the start.
    Empty,
    /// The lot length is not a positive number.
    Length,
    /// More than [`MAX_LOTS_PER_SPLIT`] lots would be made.
    TooMany(usize),
}

impl std::fmt::Display for SplitError {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        match self {
            Self::Empty => write!(f, "the end chainage must be after the start"),
            Self::Length => write!(f, "the lot length must be a positive number of metres"),
            Self::TooMany(n) => write!(
                f,
                "this would make {n} lots; at most {MAX_LOTS_PER_SPLIT} at once"
            ),
        }
    }
}

/// Cuts `from_m..to_m` into pieces of `every_m` from the start; the last piece ends at
/// `to_m` and is shorter when the stretch is not a whole number of pieces. A last piece
/// shorter than a tenth of `every_m` is joined to the one before it, so no sliver lot is
/// made from a rounding remainder (common practice: lots are whole sections of work).
pub fn split_range(from_m: f64, to_m: f64, every_m: f64) -> Result<Vec<(f64, f64)>, SplitError> {
    if !(from_m.is_finite() && to_m.is_finite()) || to_m <= from_m {
        return Err(SplitError::Empty);
    }
    if !every_m.is_finite() || every_m <= 0.0 {
        return Err(SplitError::Length);
    }
    let whole = ((to_m - from_m) / every_m).floor();
    if whole > MAX_LOTS_PER_SPLIT as f64 {
        return Err(SplitError::TooMany(whole as usize));
    }
    let mut pieces = Vec::new();
    let mut start = from_m;
    let mut i = 1.0;
    while start < to_m {
        let end = (from_m + i * every_m).min(to_m);
        pieces.push((start, end));
        start = end;
        i += 1.0;
    }
    if pieces.len() > 1
        && let Some(&(s, e)) = pieces.last()
        && e - s < every_m / 10.0
    {
        pieces.pop();
        if let Some(last) = pieces.last_mut() {
            last.1 = e;
        }
    }
    if pieces.len() > MAX_LOTS_PER_SPLIT {
        return Err(SplitError::TooMany(pieces.len()));
    }
    Ok(pieces)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn a_stretch_is_cut_from_its_start_with_a_short_last_lot() {
        // 1000–1450 m every 100 m: four whole lots and a 50 m remainder (hand arithmetic).
        let p = split_range(1000.0, 1450.0, 100.0).expect("splits");
        assert_eq!(
            p,
            vec![
                (1000.0, 1100.0),
                (1100.0, 1200.0),
                (1200.0, 1300.0),
                (1300.0, 1400.0),
                (1400.0, 1450.0)
            ]
        );
    }

    #[test]
    fn a_sliver_remainder_joins_the_lot_before() {
        // 0–205 m every 100 m: the 5 m remainder (< 10 m) joins the second lot (hand arithmetic).
        assert_eq!(
            split_range(0.0, 205.0, 100.0).expect("splits"),
            vec![(0.0, 100.0), (100.0, 205.0)]
        );
    }

    #[test]
    fn nonsense_is_refused() {
        assert_eq!(split_range(100.0, 100.0, 10.0), Err(SplitError::Empty));
        assert_eq!(split_range(0.0, 100.0, 0.0), Err(SplitError::Length));
        assert_eq!(
            split_range(0.0, 10_000.0, 1.0),
            Err(SplitError::TooMany(10_000))
        );
    }
}
