//! The estimation-error bands part of "Further analysis" (`further.bands` in `/data/report.json`, and one
//! whisker chart per family, `bands-<family>.svg`): each family's largest holdings with the 5th–95th
//! percentile of their weight over the bootstrap resamples, the median and the point weight; a table of
//! weights with their bands and held share; the bands of expected return and CVaR; and a paragraph that
//! sorts the held assets by the rule [`firmness`].
//!
//! Reads [`RunResult::analysis`]'s bands, the models' point weights and the scenario columns' asset codes;
//! computes nothing but the sorting.

use crate::analysis::bands::{Bands, FamilyBands, HELD_ABOVE};
use crate::models::Family;
use crate::report::draw::{
    Area, Chart, Drawn, GRID, INK, MUTED, draw, font, mark, muted, text_width, tick, tick_decimals,
};
use crate::report::format::{self, NONE, Style, pct, shortlist};
use crate::report::text::Caveat;
use crate::report::view::{Head, identity_of};
use crate::run::RunResult;
use plotters::prelude::*;
use plotters::style::text_anchor::{HPos, Pos, VPos};
use serde::Serialize;

/// Held in at least this share of the resamples: a firm holding.
pub const FIRM_FROM: f64 = 0.90;
/// Held in a share of the resamples between these two: a coin toss.
pub const COIN_TOSS: (f64, f64) = (0.25, 0.75);
/// A mean turnover Σ|w* − w| from the point solution above this makes a family's weights unstable (a
/// caveat): on average a resample's portfolio would trade a quarter of the fund away from the point one.
pub const UNSTABLE_ABOVE: f64 = 0.50;
/// Holdings drawn in each whisker chart, and rows of each table at most.
const CHART_ROWS: usize = 10;
const TABLE_ROWS: usize = 15;
/// The chart files, in [`Family::ALL`] order.
const CHARTS: [&str; 3] = [
    "bands-max_return.svg",
    "bands-min_cvar.svg",
    "bands-max_ratio.svg",
];

/// How firm a holding is, by the share of resamples holding it above [`HELD_ABOVE`].
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
#[serde(rename_all = "snake_case")]
pub enum Firmness {
    /// Held in at least [`FIRM_FROM`] of the resamples.
    Firm,
    /// Held in more than 75% and less than 90%.
    Mostly,
    /// Held in 25%–75%: a coin toss.
    CoinToss,
    /// Held in less than 25%.
    Rarely,
}

/// The rule of the paragraph: ≥ 90% firm, 25%–75% a coin toss, above 75% mostly held, below 25% rarely.
pub fn firmness(held_share: f64) -> Firmness {
    if held_share >= FIRM_FROM {
        Firmness::Firm
    } else if held_share > COIN_TOSS.1 {
        Firmness::Mostly
    } else if held_share >= COIN_TOSS.0 {
        Firmness::CoinToss
    } else {
        Firmness::Rarely
    }
}

/// The bands part as printed.
#[derive(Serialize)]
pub struct BandsShow {
    pub resamples: String,
    pub block_length: String,
    pub held_above: String,
    pub families: Vec<FamilyShow>,
}

/// One family's bands.
#[derive(Serialize)]
pub struct FamilyShow {
    pub head: Head,
    /// The whisker chart's file, `null` when the family had no point solution or no solved resample.
    pub chart: Option<&'static str>,
    pub solved: String,
    pub rows: Vec<BandRow>,
    /// Assets held in some resample but left out of the table.
    pub more: usize,
    pub expected_return: [String; 3],
    pub cvar: [String; 3],
    pub point_return: String,
    pub point_cvar: String,
    pub mean_turnover: String,
    pub paragraph: String,
}

/// One asset's row: point weight, [p5, p50, p95] and held share.
#[derive(Serialize)]
pub struct BandRow {
    pub asset: String,
    pub point: String,
    pub band: [String; 3],
    pub held: String,
    pub firmness: Firmness,
}

/// The part, or the sentence saying why it is absent.
pub fn show(r: &RunResult) -> Result<BandsShow, String> {
    if r.scenarios.from_file() {
        return Err(crate::report::text::from_file_absent(
            r,
            "The estimation-error bands",
        ));
    }
    let b = r.analysis.bands.as_ref().ok_or_else(|| {
        "The estimation-error bands are switched off for this run (analysis.band_resamples: 0), so the pack does not show how firm the candidate weights are.".to_string()
    })?;
    Ok(BandsShow {
        resamples: format::count(b.resamples),
        block_length: format::number(b.block_length, 1),
        held_above: pct(HELD_ABOVE, Style::Weight),
        families: b
            .models
            .iter()
            .enumerate()
            .map(|(k, f)| family(r, b, k, f))
            .collect(),
    })
}

/// The point weights of family `k` (Family::ALL order), when it had an optimum.
fn point(r: &RunResult, k: usize) -> Option<&[f64]> {
    r.models.get(k)?.outcome.weights.as_deref()
}

/// Asset indices shown for a family: held at the point or in at least a quarter of the resamples, the
/// largest point weight first (then the largest median).
fn shown_assets(f: &FamilyBands, x: Option<&[f64]>) -> Vec<usize> {
    let at = |a: usize| x.map_or(0.0, |x| x[a]);
    let mut idx: Vec<usize> = (0..f.weights.len())
        .filter(|&a| at(a) > HELD_ABOVE || f.held_share[a] >= COIN_TOSS.0)
        .collect();
    idx.sort_by(|&a, &b| {
        at(b)
            .total_cmp(&at(a))
            .then(f.weights[b][1].total_cmp(&f.weights[a][1]))
            .then(a.cmp(&b))
    });
    idx
}

fn family(r: &RunResult, b: &Bands, k: usize, f: &FamilyBands) -> FamilyShow {
    let fam = Family::ALL[k];
    let x = point(r, k);
    let idx = shown_assets(f, x);
    let name = |a: usize| r.scenarios.assets[a].clone();
    let rows = idx
        .iter()
        .take(TABLE_ROWS)
        .map(|&a| BandRow {
            asset: name(a),
            point: x.map_or(NONE.into(), |x| format::weight(x[a])),
            band: f.weights[a].map(format::weight),
            held: pct(f.held_share[a], Style::Weight),
            firmness: firmness(f.held_share[a]),
        })
        .collect();
    let report = r.models.get(k);
    let profile = report.and_then(|m| m.profile.as_ref());
    FamilyShow {
        head: Head::of(identity_of(fam)),
        chart: (x.is_some() && f.solved > 0).then_some(CHARTS[k]),
        solved: format!(
            "{} of {}",
            format::count(f.solved),
            format::count(b.resamples)
        ),
        rows,
        more: idx.len().saturating_sub(TABLE_ROWS),
        expected_return: f.expected_return.map(|v| pct(v, Style::Return)),
        cvar: f.cvar.map(|v| pct(v, Style::Loss)),
        point_return: profile.map_or(NONE.into(), |p| pct(p.expected_return, Style::Return)),
        point_cvar: profile.map_or(NONE.into(), |p| {
            pct(p.at(r.config.confidence).cvar, Style::Loss)
        }),
        mean_turnover: f
            .mean_turnover
            .map_or(NONE.into(), |t| pct(t, Style::Weight)),
        paragraph: paragraph(fam, f, x, &idx, &name),
    }
}

/// The family's held assets sorted by [`firmness`], in words.
fn paragraph(
    fam: Family,
    f: &FamilyBands,
    x: Option<&[f64]>,
    idx: &[usize],
    name: &dyn Fn(usize) -> String,
) -> String {
    let label = fam.label();
    let Some(x) = x.filter(|_| f.solved > 0) else {
        return format!(
            "{label} has no point solution or no resample with an optimum, so its weights have no bands."
        );
    };
    let held: Vec<usize> = idx.iter().copied().filter(|&a| x[a] > HELD_ABOVE).collect();
    let of = |kind: Firmness| -> Vec<String> {
        held.iter()
            .copied()
            .filter(|&a| firmness(f.held_share[a]) == kind)
            .map(name)
            .collect()
    };
    let (firm, toss) = (of(Firmness::Firm), of(Firmness::CoinToss));
    let mut text = format!(
        "{label} holds {} assets above {}; {} of them are firm (held in at least 90% of the resamples)",
        held.len(),
        pct(HELD_ABOVE, Style::Weight),
        firm.len()
    );
    if !firm.is_empty() {
        text += &format!(": {}", shortlist(&firm, 8));
    }
    text += ". ";
    text += &if toss.is_empty() {
        "None of its holdings is a coin toss (held in 25%–75% of the resamples).".to_string()
    } else {
        format!(
            "A coin toss (held in 25%–75% of the resamples): {}.",
            shortlist(&toss, 8)
        )
    };
    let rare = of(Firmness::Rarely);
    if !rare.is_empty() {
        text += &format!(
            " Held at the point but in fewer than 25% of the resamples: {}.",
            shortlist(&rare, 8)
        );
    }
    text
}

/// A caveat for each family whose weights are unstable: mean turnover from its point solution above
/// [`UNSTABLE_ABOVE`].
pub fn caveats(r: &RunResult) -> Vec<Caveat> {
    let Some(b) = &r.analysis.bands else {
        return vec![];
    };
    b.models
        .iter()
        .zip(Family::ALL)
        .filter_map(|(f, fam)| Some((fam.label(), f.mean_turnover?)))
        .filter(|(_, t)| *t > UNSTABLE_ABOVE)
        .map(|(label, t)| Caveat {
            title: format!("{label}: unstable weights"),
            text: format!(
                "Re-solved on {} bootstrap resamples of the history, {label}'s portfolio lies on average {} (sum of absolute weight differences) away from this run's, above the {} this pack calls unstable: its weights owe much to the particular history, and the bands under Further analysis show which holdings are firm.",
                format::count(b.resamples),
                pct(t, Style::Weight),
                pct(UNSTABLE_ABOVE, Style::Weight)
            ),
        })
        .collect()
}

/// One whisker chart per family with a point solution and a solved resample.
pub fn charts(r: &RunResult) -> crate::error::Result<Vec<Chart>> {
    let Some(b) = &r.analysis.bands else {
        return Ok(vec![]);
    };
    let mut out = vec![];
    for (k, f) in b.models.iter().enumerate() {
        let Some(x) = point(r, k).filter(|_| f.solved > 0) else {
            continue;
        };
        let idx: Vec<usize> = shown_assets(f, Some(x))
            .into_iter()
            .take(CHART_ROWS)
            .collect();
        let height = 70 + 26 * idx.len() as u32;
        out.push(draw(CHARTS[k], height, |a| {
            whiskers(a, r, Family::ALL[k], f, x, &idx)
        })?);
    }
    Ok(out)
}

/// Per asset a line from p5 to p95 with end ticks, a tick at p50 and the family's marker at the point
/// weight; weights across in percent.
fn whiskers(
    area: &Area,
    r: &RunResult,
    fam: Family,
    f: &FamilyBands,
    x: &[f64],
    idx: &[usize],
) -> Drawn {
    let hi = idx
        .iter()
        .map(|&a| f.weights[a][2].max(x[a]))
        .fold(0.01, f64::max)
        * 100.0
        * 1.08;
    let (left, right, top) = (110, crate::report::draw::WIDTH as i32 - 24, 18);
    let px = |v: f64| left + ((v * 100.0 / hi) * (right - left) as f64).round() as i32;
    let bottom = top + 26 * idx.len() as i32;
    grid(area, hi, &px, (top, bottom))?;
    let id = identity_of(fam);
    for (row, &a) in idx.iter().enumerate() {
        let y = top + 13 + 26 * row as i32;
        let code = &r.scenarios.assets[a];
        area.draw(&Text::new(
            code.as_str(),
            (left - 10 - text_width(code, 12.0).min(90), y),
            font(12.0).pos(Pos::new(HPos::Left, VPos::Center)),
        ))?;
        let [p5, p50, p95] = f.weights[a];
        area.draw(&PathElement::new(
            vec![(px(p5), y), (px(p95), y)],
            MUTED.stroke_width(2),
        ))?;
        for end in [p5, p95] {
            area.draw(&PathElement::new(
                vec![(px(end), y - 5), (px(end), y + 5)],
                MUTED.stroke_width(2),
            ))?;
        }
        area.draw(&PathElement::new(
            vec![(px(p50), y - 8), (px(p50), y + 8)],
            INK.stroke_width(3),
        ))?;
        mark(area, (px(x[a]), y), id)?;
    }
    area.draw(&Text::new(
        "weight (line: 5th to 95th percentile over the resamples; dark tick: median; marker: this run's weight)",
        (left, bottom + 32),
        muted(11.5).pos(Pos::new(HPos::Left, VPos::Center)),
    ))?;
    Ok(())
}

/// Vertical grid lines with their percentage labels under the rows, from 0 to `hi` percent.
fn grid(area: &Area, hi: f64, px: &dyn Fn(f64) -> i32, (top, bottom): (i32, i32)) -> Drawn {
    let decimals = tick_decimals(hi);
    let step = nice_step(hi);
    let mut t = 0.0;
    while t <= hi + 1e-9 {
        let at = px(t / 100.0);
        area.draw(&PathElement::new(vec![(at, top), (at, bottom)], GRID))?;
        area.draw(&Text::new(
            tick(t, decimals),
            (at, bottom + 12),
            muted(11.5).pos(Pos::new(HPos::Center, VPos::Center)),
        ))?;
        t += step;
    }
    Ok(())
}

/// A tick step of 1, 2 or 5 times a power of ten giving four to eight ticks over 0..`hi` (percent).
fn nice_step(hi: f64) -> f64 {
    let raw = hi / 6.0;
    let p = 10f64.powf(raw.log10().floor());
    [1.0, 2.0, 5.0, 10.0]
        .into_iter()
        .map(|m| m * p)
        .find(|s| *s >= raw)
        .unwrap_or(10.0 * p)
}

#[cfg(test)]
mod tests {
    use super::*;

    /// The paragraph's rule, as stated in the pack: ≥ 90% firm, 25%–75% a coin toss.
    #[test]
    fn firmness_follows_the_stated_thresholds() {
        assert_eq!(firmness(1.0), Firmness::Firm);
        assert_eq!(firmness(0.90), Firmness::Firm);
        assert_eq!(firmness(0.89), Firmness::Mostly);
        assert_eq!(firmness(0.75), Firmness::CoinToss);
        assert_eq!(firmness(0.25), Firmness::CoinToss);
        assert_eq!(firmness(0.24), Firmness::Rarely);
    }

    #[test]
    fn tick_steps_are_one_two_or_five() {
        assert_eq!(nice_step(11.0), 2.0);
        assert_eq!(nice_step(5.0), 1.0);
        assert_eq!(nice_step(30.0), 5.0);
    }
}
