//! The efficient frontier part of "Further analysis": its table (`further.frontier` in
//! `/data/report.json`) and its chart (`frontier.svg`), expected return against CVaR along the frontier
//! with the portfolios marked and the ray from the origin through the max-ratio portfolio.
//!
//! Reads [`RunResult::analysis`]'s frontier and the max-ratio model's result; computes nothing beyond the
//! return per unit of CVaR of each point.

use crate::analysis::frontier::Frontier;
use crate::models::Family;
use crate::report::draw::{
    Area, Cartesian, Chart, Drawn, GRID, MUTED, colour, draw, font, mark, padded, text_width, tick,
    tick_decimals,
};
use crate::report::format::{self, Style, pct};
use crate::report::money;
use crate::report::view::{Portfolio, identity_of, solved};
use crate::run::RunResult;
use plotters::prelude::*;
use plotters::style::text_anchor::{HPos, Pos, VPos};
use serde::Serialize;

/// Every `FRONTIER_STEP`-th frontier point (and the last) goes into the table; the chart shows them all.
pub const FRONTIER_STEP: usize = 4;

/// The frontier as printed.
#[derive(Serialize)]
pub struct FrontierShow {
    pub solved: String,
    pub requested: String,
    pub low: String,
    pub high: String,
    pub step: usize,
    pub rows: Vec<FrontierRow>,
    /// The numeric side of the ray's check: how the frontier points' ratios compare with the max-ratio model's.
    pub tangency: Option<String>,
}

/// One frontier point in the table.
#[derive(Serialize)]
pub struct FrontierRow {
    pub point: String,
    pub cvar: String,
    pub var: String,
    pub expected_return: String,
    pub ratio: String,
    /// CVaR and VaR in the base currency, digits only; `null` without a fund value.
    pub cvar_money: Option<String>,
    pub var_money: Option<String>,
}

/// A solved frontier point: its 1-based position in the sweep, CVaR, VaR and expected return.
#[derive(Debug, Clone, Copy)]
pub struct Solved {
    pub point: usize,
    pub cvar: f64,
    pub var: f64,
    pub expected_return: f64,
}

/// The frontier points that have a solution, in sweep order (lowest CVaR first).
pub fn solved_points(f: &Frontier) -> Vec<Solved> {
    f.points
        .iter()
        .enumerate()
        .filter(|(_, p)| p.status == "optimal")
        .filter_map(|(i, p)| {
            Some(Solved {
                point: i + 1,
                cvar: p.cvar?,
                var: p.var?,
                expected_return: p.expected_return?,
            })
        })
        .collect()
}

/// Expected return per unit of CVaR, defined for a positive CVaR only (as in the summary table).
fn ratio(er: f64, cvar: f64) -> Option<f64> {
    (cvar > 0.0).then(|| er / cvar)
}

/// The max-ratio model's (CVaR, expected return) at the model level, when it was solved.
pub fn max_ratio_point(r: &RunResult) -> Option<(f64, f64)> {
    let m = r
        .models
        .iter()
        .find(|m| m.family == Family::MaxRatio)
        .filter(|m| solved(m))?;
    let p = m.profile.as_ref()?;
    Some((p.at(r.config.confidence).cvar, p.expected_return))
}

/// The frontier's table, or the sentence that says why there is none.
pub fn show(r: &RunResult) -> Result<FrontierShow, String> {
    let f = r.analysis.frontier.as_ref().ok_or_else(|| {
        "The efficient frontier was not computed: the lowest-CVaR or the highest-return program has no solution within the limits (see Checks), so there is no range of CVaR caps to sweep.".to_string()
    })?;
    let pts = solved_points(f);
    if pts.is_empty() {
        return Err(format!(
            "The efficient frontier was not computed: none of its {} CVaR caps gave a solution within the limits.",
            f.points.len()
        ));
    }
    let last = pts.len() - 1;
    let rows = pts
        .iter()
        .enumerate()
        .filter(|(i, _)| i % FRONTIER_STEP == 0 || *i == last)
        .map(|(_, p)| FrontierRow {
            point: p.point.to_string(),
            cvar: pct(p.cvar, Style::Loss),
            var: pct(p.var, Style::Loss),
            expected_return: pct(p.expected_return, Style::Return),
            ratio: ratio(p.expected_return, p.cvar).map_or("n/a".into(), |x| format::number(x, 4)),
            cvar_money: money::amount(money::fund(r), p.cvar, Style::Loss),
            var_money: money::amount(money::fund(r), p.var, Style::Loss),
        })
        .collect();
    Ok(FrontierShow {
        solved: format::count(pts.len()),
        requested: format::count(f.points.len()),
        low: pct(f.min_cvar, Style::Loss),
        high: pct(f.max_return_cvar, Style::Loss),
        step: FRONTIER_STEP,
        rows,
        tangency: tangency(r, &pts),
    })
}

/// Charnes and Cooper (1962): the max-ratio portfolio maximises return per unit of CVaR over the feasible
/// set, so no frontier point (all within the same set) may have a higher ratio. States the comparison.
fn tangency(r: &RunResult, pts: &[Solved]) -> Option<String> {
    let (cvar, er) = max_ratio_point(r)?;
    let star = ratio(er, cvar)?;
    let best = pts
        .iter()
        .filter_map(|p| ratio(p.expected_return, p.cvar).map(|x| (p.point, x)))
        .max_by(|a, b| a.1.total_cmp(&b.1))?;
    // A relative hair of slack: both figures come from LP solutions with their own tolerances.
    let below = best.1 <= star + 1e-6 * star.abs().max(1e-9);
    Some(if below {
        format!(
            "In numbers: Max ratio earns {} of expected return per unit of CVaR; the best of the frontier points, point {}, earns {}, and none earns more.",
            format::number(star, 4),
            best.0,
            format::number(best.1, 4)
        )
    } else {
        format!(
            "In numbers: frontier point {} earns {} of expected return per unit of CVaR, more than Max ratio's {}; the ratio model fell short of the frontier's best ratio and should be reviewed.",
            best.0,
            format::number(best.1, 4),
            format::number(star, 4)
        )
    })
}

// ---------------------------------------------------------------------------------------------------------
// Chart

/// The frontier line: a mid grey, so it reads as the backdrop the portfolios sit on.
const FRONTIER: RGBColor = RGBColor(0x8a, 0x90, 0x99);

/// `frontier.svg`, drawn exactly when [`show`] has points to print; `shown` are the report's portfolios.
pub fn chart(r: &RunResult, shown: &[Portfolio]) -> crate::error::Result<Option<Chart>> {
    let pts = r
        .analysis
        .frontier
        .as_ref()
        .map(solved_points)
        .unwrap_or_default();
    if pts.is_empty() {
        return Ok(None);
    }
    let marked: Vec<&Portfolio> = shown.iter().filter(|v| v.profile.is_some()).collect();
    draw("frontier.svg", 330, |a| frontier(a, r, &marked, &pts)).map(Some)
}

/// Expected return against CVaR along the frontier, the portfolios marked, and the ray from the origin
/// through the max-ratio portfolio (slope = its return per unit of CVaR), which touches the frontier there.
fn frontier(area: &Area, r: &RunResult, marked: &[&Portfolio], pts: &[Solved]) -> Drawn {
    let c = r.config.confidence;
    let line: Vec<(f64, f64)> = pts
        .iter()
        .map(|p| (p.cvar * 100.0, p.expected_return * 100.0))
        .collect();
    let marks: Vec<(f64, f64)> = marked
        .iter()
        .map(|v| {
            v.profile
                .map(|p| (p.at(c).cvar * 100.0, p.expected_return * 100.0))
                .unwrap()
        })
        .collect();
    let (x0, x1) = padded(line.iter().chain(&marks).map(|p| p.0), 0.08, false);
    let (y0, y1) = padded(line.iter().chain(&marks).map(|p| p.1), 0.14, false);
    let mut chart = axes(area, c, (x0, x1), (y0, y1))?;
    let ray = max_ratio_point(r)
        .filter(|(cv, _)| *cv > 0.0)
        .and_then(|(cv, er)| clip_ray(er / cv, (x0, x1), (y0, y1)));
    if let Some(seg) = ray {
        chart.draw_series(DashedLineSeries::new(
            seg.to_vec(),
            7,
            5,
            colour(identity_of(Family::MaxRatio)).stroke_width(2),
        ))?;
    }
    frontier_line(area, &mut chart, &line)?;
    for (v, p) in marked.iter().zip(&marks) {
        let at = chart.backend_coord(p);
        mark(area, at, v.identity)?;
        area.draw(&Text::new(
            v.identity.label,
            (at.0 + 11, at.1 + 12),
            font(12.5).pos(Pos::new(HPos::Left, VPos::Center)),
        ))?;
    }
    frontier_legend(area, ray.is_some())
}

/// The plot box with CVaR across and expected return up, both in percent.
fn axes<'a, 'b>(
    area: &'a Area<'b>,
    c: f64,
    (x0, x1): (f64, f64),
    (y0, y1): (f64, f64),
) -> std::result::Result<Cartesian<'a, 'b>, Box<dyn std::error::Error>> {
    let mut chart = ChartBuilder::on(area)
        .margin(14)
        .margin_top(34)
        .x_label_area_size(46)
        .y_label_area_size(64)
        .build_cartesian_2d(x0..x1, y0..y1)?;
    let (dx, dy) = (tick_decimals(x1 - x0), tick_decimals(y1 - y0));
    chart
        .configure_mesh()
        .max_light_lines(0)
        .bold_line_style(GRID)
        .axis_style(MUTED)
        .label_style(font(12.0))
        .axis_desc_style(font(12.5))
        .x_label_formatter(&|v| tick(*v, dx))
        .y_label_formatter(&|v| tick(*v, dy))
        .x_desc(format!(
            "CVaR {} over one horizon (% loss of portfolio value)",
            format::level(c)
        ))
        .y_desc("Expected return over one horizon (%)")
        .draw()?;
    Ok(chart)
}

/// The frontier as a grey line with a dot at each solved point.
fn frontier_line(area: &Area, chart: &mut Cartesian, line: &[(f64, f64)]) -> Drawn {
    chart.draw_series(LineSeries::new(
        line.iter().copied(),
        FRONTIER.stroke_width(2),
    ))?;
    for p in line {
        area.draw(&Circle::new(chart.backend_coord(p), 3, FRONTIER.filled()))?;
    }
    Ok(())
}

/// The part of the line y = k·x inside the plot box, if any: the ray from the origin clipped to the axes.
fn clip_ray(k: f64, (x0, x1): (f64, f64), (y0, y1): (f64, f64)) -> Option<[(f64, f64); 2]> {
    let (lo, hi) = if k > 0.0 {
        (x0.max(y0 / k), x1.min(y1 / k))
    } else if k < 0.0 {
        (x0.max(y1 / k), x1.min(y0 / k))
    } else if (y0..=y1).contains(&0.0) {
        (x0, x1)
    } else {
        return None;
    };
    (lo < hi).then_some([(lo, k * lo), (hi, k * hi)])
}

fn frontier_legend(area: &Area, ray: bool) -> Drawn {
    let y = 14;
    area.draw(&PathElement::new(
        vec![(80, y), (104, y)],
        FRONTIER.stroke_width(2),
    ))?;
    area.draw(&Circle::new((92, y), 3, FRONTIER.filled()))?;
    area.draw(&Text::new(
        "Efficient frontier",
        (110, y),
        font(13.0).pos(Pos::new(HPos::Left, VPos::Center)),
    ))?;
    if ray {
        let x = 110 + text_width("Efficient frontier", 13.0) + 30;
        let gold = colour(identity_of(Family::MaxRatio));
        area.draw(&PathElement::new(
            vec![(x, y), (x + 9, y)],
            gold.stroke_width(2),
        ))?;
        area.draw(&PathElement::new(
            vec![(x + 14, y), (x + 24, y)],
            gold.stroke_width(2),
        ))?;
        area.draw(&Text::new(
            "Ray from the origin through Max ratio",
            (x + 30, y),
            font(13.0).pos(Pos::new(HPos::Left, VPos::Center)),
        ))?;
    }
    Ok(())
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn the_ray_is_clipped_to_the_plot_box() {
        // y = 0.1 x in the box [3, 6] × [0.25, 0.55]: enters at x = 3 (y = 0.3), leaves at x = 5.5 (y = 0.55).
        let [a, b] = clip_ray(0.1, (3.0, 6.0), (0.25, 0.55)).unwrap();
        assert!((a.0 - 3.0).abs() < 1e-12 && (a.1 - 0.3).abs() < 1e-12);
        assert!((b.0 - 5.5).abs() < 1e-12 && (b.1 - 0.55).abs() < 1e-12);
        assert!(
            clip_ray(1.0, (3.0, 6.0), (0.25, 0.55)).is_none(),
            "a steep ray misses the box"
        );
    }
}
