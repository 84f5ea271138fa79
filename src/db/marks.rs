//! Placeholders of statements whose length depends on the data: multi-row inserts and
//! look-ups of many values at once (`bulk`, `audit`).

use super::{AsConn, ConnRef};

/// How a connection's engine wants long parameter lists written.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub(crate) enum Marks {
    /// `$1, $2, …`: PostgreSQL's only form.
    Numbered,
    /// `?, ?, …`: SQLite binds these by position. It also reads `$N`, but as names,
    /// and finding each name walks the statement's list of names: a 1,728-parameter
    /// insert then spends most of its time binding (measured: a fifth of the rows/s).
    Positional,
}

impl Marks {
    /// The form `conn`'s engine reads fastest.
    pub(crate) fn of(conn: &mut impl AsConn) -> Self {
        match conn.as_conn() {
            ConnRef::Postgres(_) => Marks::Numbered,
            ConnRef::Sqlite(_) => Marks::Positional,
        }
    }
}

/// `n` placeholders from parameter `from` on, in the engine's form.
pub(crate) fn marks(style: Marks, from: usize, n: usize) -> String {
    match style {
        Marks::Numbered => (from..from + n)
            .map(|i| format!("${i}"))
            .collect::<Vec<_>>()
            .join(", "),
        Marks::Positional => vec!["?"; n].join(", "),
    }
}

/// `rows` groups of `width` placeholders, in the engine's form: the VALUES of a multi-row insert.
pub(crate) fn groups(style: Marks, rows: usize, width: usize) -> String {
    (0..rows)
        .map(|r| format!("({})", marks(style, 1 + r * width, width)))
        .collect::<Vec<_>>()
        .join(", ")
}

/// Placeholder counts for look-ups of many values; a query is padded up to one of these so
/// that few distinct statements are prepared and cached.
const LOOKUP_SIZES: [usize; 5] = [8, 32, 128, 512, 2048];

/// Values to look up, cut into parts of at most the largest look-up size, each padded with
/// its last value up to the next look-up size (a repeated value changes no `IN (…)` answer).
pub(crate) fn padded_parts<T: Copy>(values: &[T]) -> impl Iterator<Item = Vec<T>> + '_ {
    let max = LOOKUP_SIZES[LOOKUP_SIZES.len() - 1];
    values.chunks(max).filter_map(move |part| {
        let last = *part.last()?;
        let size = LOOKUP_SIZES
            .iter()
            .copied()
            .find(|s| *s >= part.len())
            .unwrap_or(max);
        let mut out = part.to_vec();
        out.resize(size, last);
        Some(out)
    })
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn placeholders_in_both_forms() {
        assert_eq!(marks(Marks::Numbered, 2, 3), "$2, $3, $4");
        assert_eq!(marks(Marks::Positional, 2, 3), "?, ?, ?");
        assert_eq!(groups(Marks::Numbered, 2, 2), "($1, $2), ($3, $4)");
    }

    #[test]
    fn look_ups_are_padded_to_few_sizes() {
        let parts: Vec<Vec<i64>> = padded_parts(&[1, 2, 3]).collect();
        assert_eq!(parts, vec![vec![1, 2, 3, 3, 3, 3, 3, 3]]);
        let many: Vec<i64> = (0..2049).collect();
        let sizes: Vec<usize> = padded_parts(&many).map(|p| p.len()).collect();
        assert_eq!(sizes, vec![2048, 8]);
        assert_eq!(padded_parts::<i64>(&[]).count(), 0);
    }
}
