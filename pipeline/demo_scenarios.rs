//! Invented simulated scenario files (`tailpack demo-scenarios`): what an economic scenario generator
//! might hand an insurer, made up from a fixed seed so the files are the same on every run.
//!
//! Each scenario is one month of joint returns from a small factor model: five common factors (equity,
//! rates, credit spread, property, commodity) with Student-t shocks (four degrees of freedom) scaled in a
//! stressed state one scenario in eight, and each asset loading on its class's factor (government bonds
//! negatively on equity in a stress, as a flight to quality) plus an idiosyncratic normal shock. Returns
//! are `exp(log return) − 1`, so every one is above −1. Nothing here is calibrated to, or resembles, any
//! real market, firm or security; the asset codes are invented.
//!
//! The files are streamed to disk as they are made (2,000 assets × 100,000 scenarios is about 1.8 GB of
//! text): `scenarios.csv`, `assets.csv` (asset, name, class, region) and `holdings.csv` (equal weights in
//! whole basis points).

use crate::error::{Error, Result};
use crate::random::Rng;
use std::io::Write;
use std::path::Path;

/// The seed of every number in the simulated files.
pub const SCENARIO_SEED: u64 = 0x5CE7_A210_F11E_2026;

/// The asset classes, in the order assets cycle through them: (code prefix, class, factor, loading,
/// monthly drift of the log return, idiosyncratic volatility).
const CLASSES: &[(&str, &str, usize, f64, f64, f64)] = &[
    ("SEQ", "equity", 0, 1.0, 0.006, 0.030),
    ("SGV", "government", 1, 1.0, 0.002, 0.004),
    ("SCR", "credit", 2, 1.0, 0.003, 0.008),
    ("SEQ", "equity", 0, 1.2, 0.007, 0.045),
    ("SPR", "property", 3, 1.0, 0.004, 0.015),
    ("SCM", "commodity", 4, 1.0, 0.002, 0.040),
];

/// Monthly volatility of each factor in the calm state, and the stressed state's multiplier.
const FACTOR_VOL: [f64; 5] = [0.040, 0.012, 0.015, 0.025, 0.050];
const STRESS_SCALE: f64 = 2.5;
/// One scenario in this many is in the stressed state.
const STRESS_EVERY: usize = 8;

/// What was written.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct Written {
    pub assets: usize,
    pub scenarios: usize,
}

/// Asset `i`'s code, e.g. `SEQ-0001`.
fn code(i: usize) -> String {
    format!("{}-{:04}", CLASSES[i % CLASSES.len()].0, i + 1)
}

/// Writes `scenarios.csv`, `assets.csv` and `holdings.csv` for `assets` × `scenarios` into `dir`.
pub fn write(dir: &Path, assets: usize, scenarios: usize) -> Result<Written> {
    if assets == 0 || scenarios == 0 || assets > 100_000 {
        return Err(Error::config(
            dir,
            format!(
                "demo-scenarios: {assets} assets × {scenarios} scenarios: give at least one of each and at most 100,000 assets"
            ),
        ));
    }
    crate::error::fs::create_dir_all(dir)?;
    crate::error::fs::write(&dir.join("assets.csv"), asset_file(assets))?;
    crate::error::fs::write(&dir.join("holdings.csv"), holdings_file(assets))?;
    let path = dir.join("scenarios.csv");
    let file = std::fs::File::create(&path).map_err(|source| Error::Io {
        action: "cannot write",
        path: path.clone(),
        source,
    })?;
    let mut out = std::io::BufWriter::with_capacity(1 << 20, file);
    write_scenarios(&mut out, assets, scenarios)
        .and_then(|_| out.flush())
        .map_err(|source| Error::Io {
            action: "cannot write",
            path,
            source,
        })?;
    Ok(Written { assets, scenarios })
}

const NOTE: &str = "# SIMULATED DEMO DATA - invented by tailpack's deterministic scenario generator (seed 0x5ce7a210f11e2026); fictitious assets, not real securities or a real market";

fn asset_file(n: usize) -> String {
    let mut s = format!("{NOTE}\nasset,name,class,region\n");
    for i in 0..n {
        let (_, class, ..) = CLASSES[i % CLASSES.len()];
        let region = ["north", "south", "east", "west"][(i / CLASSES.len()) % 4];
        s.push_str(&format!(
            "{},Simulated {class} {},{class},{region}\n",
            code(i),
            i + 1
        ));
    }
    s
}

/// Equal weights in whole basis points (the remainder to the first assets), so they sum to exactly 1.
fn holdings_file(n: usize) -> String {
    let (each, extra) = (10_000 / n, 10_000 % n);
    let mut s = format!("{NOTE}\nasset,weight\n");
    for i in 0..n {
        let bp = each + usize::from(i < extra);
        s.push_str(&format!("{},{}.{:04}\n", code(i), bp / 10_000, bp % 10_000));
    }
    s
}

/// `v` with five decimals (as `{:.5}` would write it, rounded half away from zero), without the
/// formatter's cost: the file has hundreds of millions of cells.
fn push_fixed5(out: &mut String, v: f64) {
    let units = (v * 1e5).round() as i64;
    if units < 0 {
        out.push('-');
    }
    let u = units.unsigned_abs();
    let (whole, frac) = (u / 100_000, u % 100_000);
    out.push_str(&whole.to_string());
    out.push('.');
    let digits = frac.to_string();
    for _ in digits.len()..5 {
        out.push('0');
    }
    out.push_str(&digits);
}

fn write_scenarios(out: &mut impl Write, n: usize, s: usize) -> std::io::Result<()> {
    writeln!(out, "{NOTE}")?;
    write!(out, "scenario")?;
    for i in 0..n {
        write!(out, ",{}", code(i))?;
    }
    writeln!(out)?;
    let mut rng = Rng::from_seed(SCENARIO_SEED);
    let mut line = String::with_capacity(n * 10 + 16);
    for k in 0..s {
        let stressed = rng.below(STRESS_EVERY) == 0;
        let scale = if stressed { STRESS_SCALE } else { 1.0 };
        let f: Vec<f64> = FACTOR_VOL
            .iter()
            .map(|v| v * scale * rng.student_t4())
            .collect();
        line.clear();
        line.push_str(&format!("S{:06}", k + 1));
        for i in 0..n {
            let (_, class, factor, loading, drift, idio) = CLASSES[i % CLASSES.len()];
            let mut x = drift + loading * f[factor] + idio * rng.normal();
            if class == "government" && stressed {
                x -= 0.2 * f[0];
            }
            line.push(',');
            push_fixed5(&mut line, x.exp_m1());
        }
        line.push('\n');
        out.write_all(line.as_bytes())?;
    }
    Ok(())
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn five_decimals_as_the_formatter_writes_them() {
        for v in [
            0.0, 0.012345, -0.012345, -0.000004, 1.5, -0.99999, 12.000001, 0.1,
        ] {
            let mut s = String::new();
            push_fixed5(&mut s, v);
            let want = format!("{v:.5}");
            assert_eq!(
                s.parse::<f64>().unwrap(),
                want.parse::<f64>().unwrap(),
                "{v}: {s} vs {want}"
            );
        }
    }

    #[test]
    fn holdings_sum_to_one_in_basis_points() {
        for n in [1, 7, 50, 2000, 3] {
            let total: f64 = holdings_file(n)
                .lines()
                .skip(2)
                .map(|l| l.split(',').nth(1).unwrap().parse::<f64>().unwrap())
                .sum();
            assert!((total - 1.0).abs() < 1e-9, "{n}: {total}");
        }
    }

    #[test]
    fn the_same_seed_writes_the_same_file_and_every_return_is_above_minus_one() {
        let (mut a, mut b) = (Vec::new(), Vec::new());
        write_scenarios(&mut a, 12, 300).unwrap();
        write_scenarios(&mut b, 12, 300).unwrap();
        assert_eq!(a, b);
        let text = String::from_utf8(a).unwrap();
        let cells: Vec<f64> = text
            .lines()
            .skip(2)
            .flat_map(|l| {
                l.split(',')
                    .skip(1)
                    .map(|c| c.parse::<f64>().unwrap())
                    .collect::<Vec<_>>()
            })
            .collect();
        assert_eq!(cells.len(), 12 * 300);
        assert!(cells.iter().all(|r| *r > -1.0));
    }
}
