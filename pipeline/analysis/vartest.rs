//! VaR backtests: exception counts, Kupiec's proportion-of-failures test, Christoffersen's independence
//! test, and the Basel traffic-light zones.
//!
//! - Kupiec (1995), "Techniques for verifying the accuracy of risk measurement models", J. Derivatives 3:
//!   LR_pof = −2 ln[(1−p)^(T−x) p^x] + 2 ln[(1−x/T)^(T−x) (x/T)^x] ~ χ²(1), p = 1 − c.
//! - Christoffersen (1998), "Evaluating interval forecasts", International Economic Review 39: with
//!   transition counts n_ij (state i today → j tomorrow, 1 = exception), π01 = n01/(n00+n01),
//!   π11 = n11/(n10+n11), π = (n01+n11)/(n00+n01+n10+n11),
//!   LR_ind = −2 ln[(1−π)^(n00+n10) π^(n01+n11)] + 2 ln[(1−π01)^n00 π01^n01 (1−π11)^n10 π11^n11] ~ χ²(1).
//! - Basel Committee on Banking Supervision (1996), "Supervisory framework for the use of backtesting in
//!   conjunction with the internal models approach": zones by the cumulative binomial probability of the
//!   exception count under the nominal rate — green below 95%, yellow from 95% to below 99.99%, red above.

use serde::Serialize;
use statrs::distribution::{Binomial, ChiSquared, ContinuousCDF, DiscreteCDF};

/// x·ln(y), with the convention 0·ln 0 = 0.
fn xlny(x: f64, y: f64) -> f64 {
    if x == 0.0 { 0.0 } else { x * y.ln() }
}

/// A likelihood-ratio statistic with its χ²(1) p-value.
#[derive(Debug, Clone, Copy, Serialize, schemars::JsonSchema)]
pub struct LrTest {
    /// The likelihood-ratio statistic (a pure number, ≥ 0).
    pub statistic: f64,
    /// Its p-value under χ²(1), a probability.
    pub p_value: f64,
}

fn chi2_1(statistic: f64) -> LrTest {
    let s = statistic.max(0.0);
    LrTest {
        statistic: s,
        p_value: ChiSquared::new(1.0).expect("df 1").sf(s),
    }
}

/// Kupiec's POF test of `exceptions` out of `t` observations at exception probability `p` (= 1 − c).
pub fn kupiec(exceptions: usize, t: usize, p: f64) -> LrTest {
    let (x, t) = (exceptions as f64, t as f64);
    let rate = x / t;
    let null = xlny(t - x, 1.0 - p) + xlny(x, p);
    let alt = xlny(t - x, 1.0 - rate) + xlny(x, rate);
    chi2_1(-2.0 * (null - alt))
}

/// Christoffersen's independence test on a 0/1 exception series; `None` when it has fewer than 2 points.
pub fn christoffersen(hits: &[bool]) -> Option<LrTest> {
    if hits.len() < 2 {
        return None;
    }
    let mut n = [[0.0f64; 2]; 2];
    for w in hits.windows(2) {
        n[usize::from(w[0])][usize::from(w[1])] += 1.0;
    }
    let (n00, n01, n10, n11) = (n[0][0], n[0][1], n[1][0], n[1][1]);
    let pi01 = if n00 + n01 > 0.0 {
        n01 / (n00 + n01)
    } else {
        0.0
    };
    let pi11 = if n10 + n11 > 0.0 {
        n11 / (n10 + n11)
    } else {
        0.0
    };
    let pi = (n01 + n11) / (n00 + n01 + n10 + n11);
    let null = xlny(n00 + n10, 1.0 - pi) + xlny(n01 + n11, pi);
    let alt = xlny(n00, 1.0 - pi01) + xlny(n01, pi01) + xlny(n10, 1.0 - pi11) + xlny(n11, pi11);
    Some(chi2_1(-2.0 * (null - alt)))
}

/// Basel traffic-light zone.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, schemars::JsonSchema)]
#[serde(rename_all = "snake_case")]
pub enum Zone {
    Green,
    Yellow,
    Red,
}

/// P(X ≤ x) for X ~ Binomial(t, p): the probability of at most `x` exceptions under an accurate model.
pub fn cumulative_probability(x: usize, t: usize, p: f64) -> f64 {
    Binomial::new(p, t as u64)
        .expect("valid binomial")
        .cdf(x as u64)
}

/// The Basel zone of `x` exceptions in `t` observations at exception probability `p`.
pub fn zone(x: usize, t: usize, p: f64) -> Zone {
    let cum = cumulative_probability(x, t, p);
    if cum < 0.95 {
        Zone::Green
    } else if cum < 0.9999 {
        Zone::Yellow
    } else {
        Zone::Red
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn kupiec_is_zero_at_the_nominal_rate() {
        assert!(kupiec(5, 100, 0.05).statistic.abs() < 1e-12);
    }
}
