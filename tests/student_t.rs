//! Student t quantiles against published tables and a reference implementation.

// The table holds t = 2.718 for ν = 11, which clippy mistakes for Euler's number.
#![allow(clippy::approx_constant)]

use lumisorb::student_t::{one_sided_99, quantile, two_sided_95, upper_tail};
use statrs::distribution::{ContinuousCDF, StudentsT};

/// NIST/SEMATECH e-Handbook of Statistical Methods, section 1.3.6.7.2, "Critical Values of the
/// Student's t Distribution" (3 decimals): (ν, t 0.975, t 0.99).
const NIST_TABLE: &[(u32, f64, f64)] = &[
    (1, 12.706, 31.821),
    (2, 4.303, 6.965),
    (3, 3.182, 4.541),
    (4, 2.776, 3.747),
    (5, 2.571, 3.365),
    (6, 2.447, 3.143),
    (7, 2.365, 2.998),
    (8, 2.306, 2.896),
    (9, 2.262, 2.821),
    (10, 2.228, 2.764),
    (11, 2.201, 2.718),
    (12, 2.179, 2.681),
    (13, 2.160, 2.650),
    (14, 2.145, 2.624),
    (15, 2.131, 2.602),
    (16, 2.120, 2.583),
    (17, 2.110, 2.567),
    (18, 2.101, 2.552),
    (19, 2.093, 2.539),
    (20, 2.086, 2.528),
    (21, 2.080, 2.518),
    (22, 2.074, 2.508),
    (23, 2.069, 2.500),
    (24, 2.064, 2.492),
    (25, 2.060, 2.485),
    (26, 2.056, 2.479),
    (27, 2.052, 2.473),
    (28, 2.048, 2.467),
    (29, 2.045, 2.462),
    (30, 2.042, 2.457),
    (40, 2.021, 2.423),
    (60, 2.000, 2.390),
    (100, 1.984, 2.364),
];

#[test]
fn matches_nist_sematech_table() {
    for &(df, t975, t99) in NIST_TABLE {
        let a = two_sided_95(df).unwrap();
        let b = one_sided_99(df).unwrap();
        // The table rounds to 3 decimals: agree within half a unit in the last place.
        assert!((a - t975).abs() <= 0.0005 + 1e-12, "df {df}: {a} vs {t975}");
        assert!((b - t99).abs() <= 0.0005 + 1e-12, "df {df}: {b} vs {t99}");
    }
    // Infinite ν row of the same table: 1.960 and 2.326; a very large ν approaches them.
    assert!((two_sided_95(10_000_000).unwrap() - 1.960).abs() < 0.0005);
    assert!((one_sided_99(10_000_000).unwrap() - 2.326).abs() < 0.0005);
}

#[test]
fn six_decimal_values() {
    // [calc] column of shared/reference-data/published-values.md §2 (bisection on the exact
    // finite-series t CDF), agreeing with every NIST entry after rounding.
    let rows: &[(u32, f64, f64)] = &[
        (1, 12.706205, 31.820516),
        (4, 2.776445, 3.746947),
        (6, 2.446912, 3.142668),
        (14, 2.144787, 2.624494),
        (30, 2.042272, 2.457262),
        (120, 1.979930, 2.357825),
    ];
    for &(df, a, b) in rows {
        assert!((two_sided_95(df).unwrap() - a).abs() < 6e-7, "df {df}");
        assert!((one_sided_99(df).unwrap() - b).abs() < 6e-7, "df {df}");
    }
}

#[test]
fn epa_mdl_factor_for_seven_replicates() {
    // US EPA 40 CFR Part 136 Appendix B Rev. 2: t = 3.143 for 7 replicates (ν = 6).
    assert!((one_sided_99(6).unwrap() - 3.143).abs() < 0.0005);
}

#[test]
fn agrees_with_statrs_for_df_1_to_200() {
    // Reference implementation: the `statrs` crate (dev-dependency), StudentsT::inverse_cdf / cdf.
    let mut worst: f64 = 0.0;
    for df in 1..=200u32 {
        let d = StudentsT::new(0.0, 1.0, f64::from(df)).unwrap();
        for &p in &[0.975, 0.99, 0.9, 0.995, 0.999] {
            let ours = quantile(df, p).unwrap();
            let theirs = d.inverse_cdf(p);
            let rel = ((ours - theirs) / theirs).abs();
            worst = worst.max(rel);
            assert!(rel < 1e-8, "df {df} p {p}: {ours} vs statrs {theirs}");
            // And our t lands on statrs's CDF at p.
            assert!((d.cdf(ours) - p).abs() < 1e-11, "df {df} p {p}");
        }
        for &t in &[0.3, 1.0, 2.5, 7.0] {
            let ours = upper_tail(df, t).unwrap();
            let theirs = 1.0 - d.cdf(t);
            assert!((ours - theirs).abs() < 1e-12, "df {df} t {t}");
        }
    }
    println!("worst relative difference to statrs, df 1..200: {worst:.2e}");
}
