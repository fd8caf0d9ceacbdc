//! "Position against policy": the display data of the policy page (`policy` in `/data/report.json`) —
//! each policy line with its benchmark series, target and permitted range and every portfolio's exposure
//! (a breach written as a word beside the figure), each portfolio's active risk against the policy
//! benchmark, and the sentences that state the current portfolio's breaches and whether the ranges bind the
//! models. Without a policy the part is `null` and `policy_absent` says so in one sentence.
//!
//! May read: the [`RunResult`] (its `policy` report), the view model ([`super::view`]),
//! [`super::format`] and [`super::money`] (the amounts of active risk). Computes nothing: every figure comes
//! from `analysis::policy`.

use super::draw::{Area, Chart, Drawn, INK, bar_frame, draw, font, legend, mark, ry};
use super::format::{self, NONE, Style, pct};
use super::money;
use super::view::{Head, Portfolio};
use crate::analysis::policy::{Line, PolicyReport, Position};
use crate::config::Money;
use crate::run::RunResult;
use plotters::prelude::*;
use plotters::style::text_anchor::{HPos, Pos, VPos};
use serde::Serialize;

/// The policy page as printed.
#[derive(Serialize)]
pub struct PolicyShow {
    /// Column heads: the portfolios in report order.
    pub heads: Vec<Head>,
    pub lines: Vec<LineRow>,
    pub active: Vec<ActiveRow>,
    /// The confidence level of the models, at which active CVaR is given.
    pub level: String,
    /// Horizons in a year and the annualisation rule, for the note under the active-risk table.
    pub horizons_per_year: String,
    pub annualisation_factor: String,
    /// The sentences under the page title: the current portfolio's breaches, then the models and the ranges.
    pub sentences: Vec<String>,
}

/// One policy line and each portfolio's exposure to it.
#[derive(Serialize)]
pub struct LineRow {
    pub name: String,
    pub benchmark: String,
    pub target: String,
    pub range: String,
    pub exposures: Vec<Exposure>,
}

/// An exposure as printed, and `below` or `above` when it lies outside the line's range.
#[derive(Serialize)]
pub struct Exposure {
    pub value: String,
    pub breach: Option<&'static str>,
}

/// One portfolio's active risk against the policy benchmark.
#[derive(Serialize)]
pub struct ActiveRow {
    pub head: Head,
    pub active_return: String,
    pub tracking_error: String,
    pub tracking_error_annualised: String,
    pub active_cvar: String,
    /// The same four in the base currency, digits only (`null` without a fund value or a portfolio).
    pub active_return_money: Option<String>,
    pub tracking_error_money: Option<String>,
    pub tracking_error_annualised_money: Option<String>,
    pub active_cvar_money: Option<String>,
}

/// The page's data, or the sentence that says no policy is configured.
pub fn show(r: &RunResult, shown: &[Portfolio]) -> Result<PolicyShow, String> {
    let Some(p) = r.policy.as_ref() else {
        return Err("No policy portfolio is configured for this fund (config section `policy`), so there are no targets, ranges, policy benchmark or active risk to report.".into());
    };
    let positions: Vec<Option<&Position>> = shown.iter().map(|v| position(p, v.key)).collect();
    let c = r.config.confidence;
    Ok(PolicyShow {
        heads: shown.iter().map(|v| Head::of(v.identity)).collect(),
        lines: p
            .lines
            .iter()
            .enumerate()
            .map(|(i, l)| line_row(l, i, &positions))
            .collect(),
        active: shown
            .iter()
            .zip(&positions)
            .map(|(v, pos)| active_row(v, *pos, c, money::fund(r)))
            .collect(),
        level: format::level(c),
        horizons_per_year: format::number(p.horizons_per_year, 2),
        annualisation_factor: format::number(p.horizons_per_year.sqrt(), 2),
        sentences: sentences(p),
    })
}

/// The chart of the policy page (`policy-ranges.svg`): one row per policy line with its permitted range as
/// a band, its target as a bar across it, and each portfolio's exposure as its marker; none without a
/// policy.
pub fn chart(r: &RunResult, shown: &[Portfolio]) -> crate::error::Result<Option<Chart>> {
    let Some(p) = r.policy.as_ref() else {
        return Ok(None);
    };
    let rows = p.lines.len();
    let height = (96 + 34 * rows) as u32;
    draw("policy-ranges.svg", height, |a| ranges(a, p, shown)).map(Some)
}

fn ranges(area: &Area, p: &PolicyReport, shown: &[Portfolio]) -> Drawn {
    let held: Vec<(&Portfolio, &Position)> = shown
        .iter()
        .filter_map(|v| position(p, v.key).map(|x| (v, x)))
        .collect();
    let top = p
        .lines
        .iter()
        .map(|l| l.max.max(l.target))
        .chain(held.iter().flat_map(|(_, x)| x.exposure.iter().copied()))
        .fold(0.0, f64::max);
    let xs = (0.0, (top * 100.0 * 1.08).max(1.0));
    let n = p.lines.len();
    let chart = bar_frame(area, xs, n, 132, 40, "Exposure (% of portfolio value)")?;
    let band = RGBColor(0xdc, 0xe6, 0xf0);
    for (i, l) in p.lines.iter().enumerate() {
        let at = |x: f64, f: f64| chart.backend_coord(&(x * 100.0, ry(n, i, f)));
        area.draw(&Rectangle::new(
            [at(l.min, 0.22), at(l.max, 0.78)],
            band.filled(),
        ))?;
        area.draw(&PathElement::new(
            vec![at(l.target, 0.12), at(l.target, 0.88)],
            INK.stroke_width(3),
        ))?;
        let (x0, y) = at(0.0, 0.5);
        area.draw(&Text::new(
            l.name.clone(),
            (x0 - 8, y),
            font(12.5).pos(Pos::new(HPos::Right, VPos::Center)),
        ))?;
        let k = held.len().max(1) as f64;
        for (j, (v, x)) in held.iter().enumerate() {
            mark(
                area,
                at(x.exposure[i], 0.3 + 0.4 * (j as f64 + 0.5) / k),
                v.identity,
            )?;
        }
    }
    let ids: Vec<_> = held.iter().map(|(v, _)| v.identity).collect();
    legend(area, &ids, (12, 14))?;
    key(area, (WIDTH_KEY, 14), band)
}

/// Where the range-and-target key starts, right of the portfolio legend.
const WIDTH_KEY: i32 = 470;

/// The key of the band (permitted range) and the bar (target).
fn key(area: &Area, (x, y): (i32, i32), band: RGBColor) -> Drawn {
    area.draw(&Rectangle::new(
        [(x, y - 6), (x + 22, y + 6)],
        band.filled(),
    ))?;
    area.draw(&Text::new(
        "permitted range",
        (x + 28, y),
        font(12.0).pos(Pos::new(HPos::Left, VPos::Center)),
    ))?;
    let t = x + 140;
    area.draw(&PathElement::new(
        vec![(t, y - 8), (t, y + 8)],
        INK.stroke_width(3),
    ))?;
    area.draw(&Text::new(
        "target",
        (t + 8, y),
        font(12.0).pos(Pos::new(HPos::Left, VPos::Center)),
    ))?;
    Ok(())
}

/// The position of a portfolio key (`current` or a model name); none for a model without a solution.
fn position<'a>(p: &'a PolicyReport, key: &str) -> Option<&'a Position> {
    p.positions.iter().find(|x| x.portfolio == key)
}

fn range(l: &Line) -> String {
    format!(
        "{}\u{2013}{}",
        pct(l.min, Style::Weight),
        pct(l.max, Style::Weight)
    )
}

fn line_row(l: &Line, i: usize, positions: &[Option<&Position>]) -> LineRow {
    LineRow {
        name: l.name.clone(),
        benchmark: l.benchmark.clone(),
        target: pct(l.target, Style::Weight),
        range: range(l),
        exposures: positions
            .iter()
            .map(|pos| match pos {
                None => Exposure {
                    value: NONE.into(),
                    breach: None,
                },
                Some(x) => Exposure {
                    value: pct(x.exposure[i], Style::Weight),
                    breach: breach_word(l, x, x.exposure[i]),
                },
            })
            .collect(),
    }
}

/// `below` or `above` for a line the analysis found outside its range.
fn breach_word(l: &Line, pos: &Position, e: f64) -> Option<&'static str> {
    if !pos.breaches.contains(&l.name) {
        return None;
    }
    Some(if e < l.min { "below" } else { "above" })
}

fn active_row(v: &Portfolio, pos: Option<&Position>, c: f64, m: Option<&Money>) -> ActiveRow {
    let f = |g: &dyn Fn(&Position) -> String| pos.map_or(NONE.to_string(), g);
    let amount = |g: &dyn Fn(&Position) -> f64, style| money::amount(m, g(pos?), style);
    ActiveRow {
        head: Head::of(v.identity),
        active_return: f(&|x| pct(x.active.active_return, Style::Return)),
        tracking_error: f(&|x| pct(x.active.tracking_error, Style::Weight)),
        tracking_error_annualised: f(&|x| pct(x.active.tracking_error_annualised, Style::Weight)),
        active_cvar: f(&|x| pct(x.active.at(c).cvar, Style::Loss)),
        active_return_money: amount(&|x| x.active.active_return, Style::Return),
        tracking_error_money: amount(&|x| x.active.tracking_error, Style::Weight),
        tracking_error_annualised_money: amount(
            &|x| x.active.tracking_error_annualised,
            Style::Weight,
        ),
        active_cvar_money: amount(&|x| x.active.at(c).cvar, Style::Loss),
    }
}

/// The current portfolio's breaches in words, then whether the ranges bind the models.
fn sentences(p: &PolicyReport) -> Vec<String> {
    let current = match position(p, super::view::CURRENT) {
        None => "No current holdings were given, so there is no current position to compare with the policy.".to_string(),
        Some(x) if x.breaches.is_empty() => format!(
            "The current portfolio lies inside the permitted range of all {} policy lines.",
            p.lines.len()
        ),
        Some(x) => format!(
            "The current portfolio is outside its permitted range in {}.",
            current_breaches(p, x)
        ),
    };
    let models = if p.ranges_as_limits {
        "The policy ranges bind the models: every model keeps each line's exposure inside its range."
            .to_string()
    } else {
        let outside: Vec<String> = p
            .positions
            .iter()
            .filter(|x| x.portfolio != super::view::CURRENT && !x.breaches.is_empty())
            .map(|x| super::view::identity(&x.portfolio).label.to_string())
            .collect();
        let tail = if outside.is_empty() {
            "no model's exposure falls outside them".to_string()
        } else {
            format!("outside them: {}", outside.join(", "))
        };
        format!(
            "The policy ranges do not bind the models (ranges_as_limits is off): they are shown for comparison only; {tail}."
        )
    };
    vec![current, models]
}

/// `Equity at 61.20% (range 42.00%–58.00%)` for each line the current portfolio breaches.
fn current_breaches(p: &PolicyReport, x: &Position) -> String {
    let parts: Vec<String> = x
        .breached(&p.lines)
        .map(|(l, e)| {
            format!(
                "{} at {} (target {}, range {})",
                l.name,
                pct(e, Style::Weight),
                pct(l.target, Style::Weight),
                range(l)
            )
        })
        .collect();
    parts.join("; ")
}
