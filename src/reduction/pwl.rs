//! Percent within limits of the quality-index method (AASHTO R 9; FHWA
//! quality-assurance practice) and the special functions it rests on: the
//! regularised incomplete beta function and the log-gamma function.

/// Estimated percent within limits from the quality index (AASHTO R 9): 100 (1 − I_x(a, a)),
/// a = (n − 2)/2, x = clamp(1/2 − Q √n / (2(n − 1)), 0, 1). None for n < 3 or Q not a number.
pub fn percent_within_limits(n: usize, quality_index: f64) -> Option<f64> {
    if n < 3 || quality_index.is_nan() {
        return None;
    }
    let nf = n as f64;
    let a = (nf - 2.0) / 2.0;
    let x = (0.5 - quality_index * nf.sqrt() / (2.0 * (nf - 1.0))).clamp(0.0, 1.0);
    let pwl = 100.0 * (1.0 - regularized_incomplete_beta(x, a, a));
    Some(pwl.clamp(0.0, 100.0))
}

/// Natural log of the gamma function for x > 0 (Lanczos, g = 7, nine terms; reflection below 1/2).
pub fn ln_gamma(x: f64) -> f64 {
    const G: f64 = 7.0;
    const COEFFS: [f64; 9] = [
        0.999_999_999_999_809_9,
        676.520_368_121_885_1,
        -1_259.139_216_722_402_8,
        771.323_428_777_653_1,
        -176.615_029_162_140_6,
        12.507_343_278_686_905,
        -0.138_571_095_265_720_12,
        9.984_369_578_019_572e-6,
        1.505_632_735_149_311_6e-7,
    ];
    if x < 0.5 {
        // Γ(x) Γ(1 − x) = π / sin(π x)
        let s = (std::f64::consts::PI * x).sin().abs();
        return std::f64::consts::PI.ln() - s.ln() - ln_gamma(1.0 - x);
    }
    let x = x - 1.0;
    let mut sum = COEFFS[0];
    for (i, c) in COEFFS.iter().enumerate().skip(1) {
        sum += c / (x + i as f64);
    }
    let t = x + G + 0.5;
    0.5 * (2.0 * std::f64::consts::PI).ln() + (x + 0.5) * t.ln() - t + sum.ln()
}

/// Continued fraction for the incomplete beta by the modified Lentz method (Numerical Recipes, betacf).
fn beta_continued_fraction(x: f64, a: f64, b: f64) -> f64 {
    const MAX_ITER: usize = 500;
    const EPS: f64 = 1e-15;
    const TINY: f64 = 1e-300;
    let qab = a + b;
    let qap = a + 1.0;
    let qam = a - 1.0;
    let mut c = 1.0;
    let mut d = 1.0 - qab * x / qap;
    if d.abs() < TINY {
        d = TINY;
    }
    d = 1.0 / d;
    let mut h = d;
    for m in 1..=MAX_ITER {
        let m = m as f64;
        let m2 = 2.0 * m;
        let aa = m * (b - m) * x / ((qam + m2) * (a + m2));
        d = 1.0 + aa * d;
        if d.abs() < TINY {
            d = TINY;
        }
        c = 1.0 + aa / c;
        if c.abs() < TINY {
            c = TINY;
        }
        d = 1.0 / d;
        h *= d * c;
        let aa = -(a + m) * (qab + m) * x / ((a + m2) * (qap + m2));
        d = 1.0 + aa * d;
        if d.abs() < TINY {
            d = TINY;
        }
        c = 1.0 + aa / c;
        if c.abs() < TINY {
            c = TINY;
        }
        d = 1.0 / d;
        let del = d * c;
        h *= del;
        if (del - 1.0).abs() < EPS {
            break;
        }
    }
    h
}

/// Regularised incomplete beta I_x(a, b) (Numerical Recipes betai); NaN for a, b ≤ 0 or x not a number.
pub fn regularized_incomplete_beta(x: f64, a: f64, b: f64) -> f64 {
    if x.is_nan() || a.is_nan() || b.is_nan() || a <= 0.0 || b <= 0.0 {
        return f64::NAN;
    }
    if x <= 0.0 {
        return 0.0;
    }
    if x >= 1.0 {
        return 1.0;
    }
    let ln_front = ln_gamma(a + b) - ln_gamma(a) - ln_gamma(b) + a * x.ln() + b * (1.0 - x).ln();
    let front = ln_front.exp();
    let value = if x < (a + 1.0) / (a + b + 2.0) {
        front * beta_continued_fraction(x, a, b) / a
    } else {
        1.0 - front * beta_continued_fraction(1.0 - x, b, a) / b
    };
    value.clamp(0.0, 1.0)
}

#[cfg(test)]
mod tests {
    use super::*;
    use proptest::prelude::*;

    fn statrs_pwl(n: usize, q: f64) -> f64 {
        let nf = n as f64;
        let a = (nf - 2.0) / 2.0;
        let x = (0.5 - q * nf.sqrt() / (2.0 * (nf - 1.0))).clamp(0.0, 1.0);
        100.0 * (1.0 - statrs::function::beta::beta_reg(a, a, x))
    }

    #[test]
    fn pwl_table_values() {
        // AASHTO R 9 / FHWA quality-index tables (from memory): Q = 0 gives 50 % for every n.
        for n in [3, 5, 10, 30] {
            assert!(
                (percent_within_limits(n, 0.0).unwrap() - 50.0).abs() < 1e-9,
                "n={n}"
            );
        }
        // n = 3 column: PWL 100 from Q = 1.15 up (from memory; exactly (n−1)/√n = 1.1547).
        assert_eq!(percent_within_limits(3, 1.16).unwrap(), 100.0);
        assert!(percent_within_limits(3, 1.15).unwrap() < 100.0);
        // n = 3: I_x(½, ½) = (2/π) asin √x (closed form), so Q = 1.00 gives 83.33 % (from memory: table 83).
        assert!((percent_within_limits(3, 1.0).unwrap() - 83.333_333).abs() < 1e-5);
        // n = 4: I_x(1, 1) = x (closed form), PWL = 50 + 100 Q / 3: Q = 0.60 gives 70.00 %.
        assert!((percent_within_limits(4, 0.6).unwrap() - 70.0).abs() < 1e-9);
        // Large n tends to the normal curve: Q = 1.645 gives ≈ 95 % (from memory; standard normal table).
        assert!((percent_within_limits(2000, 1.645).unwrap() - 95.0).abs() < 0.1);
        // Negative Q mirrors positive: PWL(−Q) = 100 − PWL(Q) (symmetry of I_x(a, a)).
        let p = percent_within_limits(7, 0.8).unwrap();
        assert!((percent_within_limits(7, -0.8).unwrap() - (100.0 - p)).abs() < 1e-9);
        assert_eq!(percent_within_limits(2, 1.0), None);
        assert_eq!(percent_within_limits(5, f64::NAN), None);
        assert_eq!(percent_within_limits(5, f64::INFINITY), Some(100.0));
        assert_eq!(percent_within_limits(5, f64::NEG_INFINITY), Some(0.0));
    }

    #[test]
    fn pwl_grid_matches_statrs() {
        for n in 3..=30usize {
            for step in -30..=30 {
                let q = f64::from(step) / 10.0;
                let ours = percent_within_limits(n, q).unwrap();
                let theirs = statrs_pwl(n, q);
                assert!(
                    (ours - theirs).abs() < 1e-9,
                    "n={n} q={q}: {ours} vs {theirs}"
                );
            }
        }
    }

    #[test]
    fn incomplete_beta_and_log_gamma_match_statrs() {
        for &a in &[0.5, 1.0, 1.5, 2.0, 3.7, 10.0, 14.0, 50.0] {
            for &b in &[0.5, 1.0, 2.5, 14.0, 40.0] {
                for k in 0..=20 {
                    let x = f64::from(k) / 20.0;
                    let ours = regularized_incomplete_beta(x, a, b);
                    let theirs = statrs::function::beta::beta_reg(a, b, x);
                    assert!(
                        (ours - theirs).abs() < 1e-10,
                        "I_{x}({a}, {b}): {ours} vs {theirs}"
                    );
                }
            }
        }
        for &x in &[0.1, 0.5, 1.0, 1.5, 2.0, 7.5, 25.0, 171.0] {
            let ours = ln_gamma(x);
            let theirs = statrs::function::gamma::ln_gamma(x);
            assert!(
                (ours - theirs).abs() < 1e-10 * theirs.abs().max(1.0),
                "lnΓ({x})"
            );
        }
        assert!(regularized_incomplete_beta(0.5, 0.0, 1.0).is_nan());
        assert!(regularized_incomplete_beta(f64::NAN, 1.0, 1.0).is_nan());
    }

    proptest! {
        #[test]
        fn pwl_rises_with_q_and_stays_in_range(n in 3usize..60, q in -4.0f64..4.0, dq in 0.0f64..2.0) {
            let lo = percent_within_limits(n, q).unwrap();
            let hi = percent_within_limits(n, q + dq).unwrap();
            prop_assert!((0.0..=100.0).contains(&lo) && (0.0..=100.0).contains(&hi));
            prop_assert!(hi >= lo - 1e-12, "n={n}: PWL({q})={lo} > PWL({})={hi}", q + dq);
        }
    }
}
