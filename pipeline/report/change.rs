//! "Since the last pack": the display data of the page after the summary (after the policy page when
//! there is one) — the previous pack named, the current portfolio's CVaR change split into its holdings
//! and market effects, each portfolio's expected return and CVaR then and now, the largest moves in the
//! current holdings, the stress results of the current holdings then and now, the checks opened and
//! resolved, the data's moves, and the fund's history over its last packs. For a first pack (or a
//! previous pack that fails verification) the part is `null` and `change_absent` says why.
//!
//! May read: `results.json`'s `change` (written by `analysis::change`, the one place the comparison is
//! made), the view model ([`super::view`]), [`super::format`] and the chart kit ([`super::draw`]: the
//! history chart). Computes nothing but the order of rows.

use super::draw::{
    Area, Chart, Drawn, GRID, MUTED, colour, draw, font, marker, padded, tick, tick_decimals,
};
use super::format::{self, NONE, Style, pct};
use super::view::{self, Head, Marker, Pair, pair};
use plotters::prelude::*;
use serde::Serialize;
use serde_json::Value;

/// How many holdings and stress rows the page lists at most (the largest moves first).
const ROWS: usize = 8;

/// The page as printed.
#[derive(Serialize)]
pub struct ChangeShow {
    /// The sentences under the title: the previous pack, the CVaR change and its two effects, the data.
    pub sentences: Vec<String>,
    /// The CVaR decomposition as label–value pairs (empty without holdings in both packs).
    pub decomposition: Vec<Pair>,
    pub level: String,
    pub portfolios: Vec<FigureRow>,
    /// The current holdings' largest weight changes.
    pub holdings: Vec<MoveRow>,
    /// The current holdings' stress results with the largest changes.
    pub stress: Vec<MoveRow>,
    pub history: Vec<HistoryRow>,
    /// Whether the history chart ([`HISTORY_CHART`]) was drawn.
    pub history_chart: bool,
}

/// One portfolio's expected return and CVaR in the previous pack and in this one.
#[derive(Serialize)]
pub struct FigureRow {
    pub head: Head,
    pub return_before: String,
    pub return_after: String,
    pub return_change: String,
    pub cvar_before: String,
    pub cvar_after: String,
    pub cvar_change: String,
}

/// A named figure then and now (a weight, a stress P&L).
#[derive(Serialize)]
pub struct MoveRow {
    pub name: String,
    pub before: String,
    pub after: String,
    pub change: String,
}

/// One pack of the fund's history.
#[derive(Serialize)]
pub struct HistoryRow {
    pub as_of: String,
    pub expected_return: String,
    pub cvar: String,
    pub worst_stress_loss: String,
    pub breaches: String,
    /// "this pack", "final", or "fails verification".
    pub note: String,
}

/// The page's data from results.json's `change`, or the sentence saying why there is nothing to compare.
pub fn show(results: &Value) -> Result<ChangeShow, String> {
    let ch = &results["change"];
    let prev = &ch["previous"];
    if prev.is_null() {
        return Err(
            "this is the fund's first pack in the archive, so there is nothing to compare with."
                .into(),
        );
    }
    if prev["verified"] != true {
        return Err(format!(
            "the previous pack ({}, as of {}, revision {}) fails verification, so it is not used and nothing is compared with it; the check `change.previous` names its problems.",
            text(&prev["folder"]),
            text(&prev["as_of"]),
            prev["revision"]
        ));
    }
    Ok(ChangeShow {
        sentences: sentences(ch, results),
        decomposition: decomposition(&ch["current_cvar"]),
        level: format::level(results["confidence"].as_f64().unwrap_or(0.0)),
        portfolios: portfolios(&ch["portfolios"]),
        holdings: moves(&ch["portfolios"]["current"]["weights"], Style::Weight),
        stress: moves(&ch["stress"]["current"], Style::Return),
        history: history(&ch["history"]),
        history_chart: has_chart(results),
    })
}

fn text(v: &Value) -> String {
    v.as_str().unwrap_or(NONE).to_string()
}

fn fig(v: &Value, style: Style) -> String {
    v.as_f64().map_or(NONE.to_string(), |x| pct(x, style))
}

/// The previous pack, the CVaR change with its effects, the data and the checks, in words.
fn sentences(ch: &Value, results: &Value) -> Vec<String> {
    let p = &ch["previous"];
    let fin = if p["final"] == true { ", final" } else { "" };
    let id: String = text(&p["pack_id"]).chars().take(12).collect();
    let mut out = vec![format!(
        "Compared with the pack as of {} (revision {}{fin}, pack id {id}…), which verifies.",
        text(&p["as_of"]),
        p["revision"]
    )];
    let cv = &ch["current_cvar"];
    let measure = if cv["basis"] == "surplus" {
        "surplus CVaR"
    } else {
        "CVaR"
    };
    if let (Some(b), Some(a)) = (cv["before"].as_f64(), cv["after"].as_f64()) {
        out.push(format!(
            "The current holdings' {measure} {} went from {} to {} ({}): {} from the change in holdings, {} from the market (the new scenarios).",
            format::level(results["confidence"].as_f64().unwrap_or(0.0)),
            pct(b, Style::Weight),
            pct(a, Style::Weight),
            pct(a - b, Style::Points),
            fig(&cv["holdings_effect"], Style::Points),
            fig(&cv["market_effect"], Style::Points)
        ));
    }
    if let Some(note) = cv["note"].as_str() {
        out.push(format!(
            "The CVaR change is not split into its effects: {note}."
        ));
    }
    if ch["basis"]["before"] != ch["basis"]["after"] {
        out.push(format!(
            "The previous pack's VaR and CVaR figures are on the {} basis and this pack's on the {} basis: their differences below compare different measures.",
            text(&ch["basis"]["before"]),
            text(&ch["basis"]["after"])
        ));
    }
    out.push(data_sentence(&ch["data"]));
    out.push(checks_sentence(&ch["checks"]));
    out
}

fn names(v: &Value) -> Vec<String> {
    v.as_array().map_or(vec![], |l| {
        l.iter()
            .filter_map(|x| x.as_str().map(str::to_string))
            .collect()
    })
}

fn data_sentence(d: &Value) -> String {
    let (added, dropped) = (names(&d["assets_added"]), names(&d["assets_dropped"]));
    let assets = match (added.is_empty(), dropped.is_empty()) {
        (true, true) => "The same assets as last time".to_string(),
        _ => format!(
            "Assets added: {}; dropped: {}",
            if added.is_empty() {
                "none".into()
            } else {
                format::shortlist(&added, 6)
            },
            if dropped.is_empty() {
                "none".into()
            } else {
                format::shortlist(&dropped, 6)
            }
        ),
    };
    let moved = &d["scenarios"]["moved"];
    format!(
        "{assets}; the scenario window moved by {} new scenarios ({} fell out), from {} to {} scenarios.",
        moved["new"],
        moved["dropped"],
        d["scenarios"]["count"]["before"],
        d["scenarios"]["count"]["after"]
    )
}

fn checks_sentence(c: &Value) -> String {
    let list = |v: &Value| {
        let n = names(v);
        if n.is_empty() {
            "none".to_string()
        } else {
            n.join(", ")
        }
    };
    format!(
        "Checks newly open: {}. Resolved: {}. Still open: {}.",
        list(&c["new"]),
        list(&c["resolved"]),
        names(&c["still_open"]).len()
    )
}

fn decomposition(cv: &Value) -> Vec<Pair> {
    if cv["before"].is_null() {
        return vec![];
    }
    vec![
        pair(
            "CVaR in the previous pack",
            fig(&cv["before"], Style::Weight),
        ),
        pair(
            "Holdings effect",
            fig(&cv["holdings_effect"], Style::Points),
        ),
        pair("Market effect", fig(&cv["market_effect"], Style::Points)),
        pair("CVaR now", fig(&cv["after"], Style::Weight)),
    ]
}

/// Every portfolio in report order that either pack has.
fn portfolios(p: &Value) -> Vec<FigureRow> {
    view::IDENTITIES
        .iter()
        .filter(|id| p.get(id.key).is_some())
        .map(|id| {
            let x = &p[id.key];
            FigureRow {
                head: Head::of(id),
                return_before: fig(&x["expected_return"]["before"], Style::Return),
                return_after: fig(&x["expected_return"]["after"], Style::Return),
                return_change: fig(&x["expected_return"]["change"], Style::Points),
                cvar_before: fig(&x["cvar"]["before"], Style::Weight),
                cvar_after: fig(&x["cvar"]["after"], Style::Weight),
                cvar_change: fig(&x["cvar"]["change"], Style::Points),
            }
        })
        .collect()
}

/// The `{name: {before, after, change}}` entries with the largest changes (a missing side last), at most
/// [`ROWS`], skipping those that did not move.
fn moves(map: &Value, style: Style) -> Vec<MoveRow> {
    let Some(m) = map.as_object() else {
        return vec![];
    };
    let mut rows: Vec<(&String, &Value, f64)> = m
        .iter()
        .map(|(k, v)| (k, v, v["change"].as_f64().map_or(f64::INFINITY, f64::abs)))
        .filter(|(_, _, c)| *c >= 0.00005)
        .collect();
    rows.sort_by(|a, b| b.2.total_cmp(&a.2).then(a.0.cmp(b.0)));
    rows.into_iter()
        .take(ROWS)
        .map(|(k, v, _)| MoveRow {
            name: k.clone(),
            before: fig(&v["before"], style),
            after: fig(&v["after"], style),
            change: fig(&v["change"], Style::Points),
        })
        .collect()
}

fn history(h: &Value) -> Vec<HistoryRow> {
    let list = h.as_array().cloned().unwrap_or_default();
    let n = list.len();
    list.iter()
        .enumerate()
        .map(|(i, e)| {
            let count = |k: &str| e[k].as_u64();
            let breaches = match (count("stress_breaches"), count("policy_breaches")) {
                (None, None) => NONE.to_string(),
                (s, p) => (s.unwrap_or(0) + p.unwrap_or(0)).to_string(),
            };
            let note = if i + 1 == n {
                "this pack"
            } else if e["verified"] != true {
                "fails verification"
            } else {
                ""
            };
            HistoryRow {
                as_of: text(&e["as_of"]),
                expected_return: fig(&e["expected_return"], Style::Return),
                cvar: fig(&e["cvar"], Style::Weight),
                worst_stress_loss: fig(&e["worst_stress_loss"], Style::Weight),
                breaches,
                note: note.into(),
            }
        })
        .collect()
}

/// The history chart's file name.
pub const HISTORY_CHART: &str = "change-history.svg";

/// The history points that have both figures: (as-of, expected return, CVaR), oldest first.
fn plotted(results: &Value) -> Vec<(String, f64, f64)> {
    results["change"]["history"].as_array().map_or(vec![], |l| {
        l.iter()
            .filter_map(|e| {
                Some((
                    e["as_of"].as_str()?.to_string(),
                    e["expected_return"].as_f64()?,
                    e["cvar"].as_f64()?,
                ))
            })
            .collect()
    })
}

/// Whether the page has a history chart: two packs or more with the current holdings' figures, the
/// previous one verified.
fn has_chart(results: &Value) -> bool {
    results["change"]["previous"]["verified"] == true && plotted(results).len() >= 2
}

/// The history chart (`change-history.svg`): the current holdings' CVaR and expected return in each of
/// the fund's last packs; none when [`has_chart`] is false.
pub fn chart(results: &Value) -> crate::error::Result<Option<Chart>> {
    if !has_chart(results) {
        return Ok(None);
    }
    let points = plotted(results);
    draw(HISTORY_CHART, 260, |a| history_lines(a, &points)).map(Some)
}

/// The two lines of the history chart: the current holdings' CVaR and expected return, in percent, by pack.
fn history_series(points: &[(String, f64, f64)]) -> [(&'static str, RGBColor, Vec<(f64, f64)>); 2] {
    let path = |f: fn(&(String, f64, f64)) -> f64| {
        points
            .iter()
            .enumerate()
            .map(|(i, p)| (i as f64, f(p) * 100.0))
            .collect()
    };
    [
        ("CVaR", colour(view::identity(view::CURRENT)), path(|p| p.2)),
        ("Expected return", RGBColor(0x2c, 0x72, 0xad), path(|p| p.1)),
    ]
}

fn history_lines(area: &Area, points: &[(String, f64, f64)]) -> Drawn {
    let n = points.len();
    let (y0, y1) = padded(
        points.iter().flat_map(|p| [p.1 * 100.0, p.2 * 100.0]),
        0.1,
        true,
    );
    let labels: Vec<String> = points.iter().map(|p| p.0.clone()).collect();
    let decimals = tick_decimals(y1 - y0);
    let mut chart = ChartBuilder::on(area)
        .margin(14)
        .margin_top(34)
        .x_label_area_size(40)
        .y_label_area_size(64)
        .build_cartesian_2d(-0.5..n as f64 - 0.5, y0..y1)?;
    chart
        .configure_mesh()
        .disable_x_mesh()
        .x_labels(n)
        .max_light_lines(0)
        .bold_line_style(GRID)
        .axis_style(MUTED)
        .label_style(font(12.0))
        .axis_desc_style(font(12.5))
        .x_label_formatter(&|x| {
            let k = x.round();
            if (x - k).abs() < 1e-9 && k >= 0.0 {
                labels.get(k as usize).cloned().unwrap_or_default()
            } else {
                String::new()
            }
        })
        .y_label_formatter(&|v| tick(*v, decimals))
        .y_desc("Current holdings (% over one horizon)")
        .draw()?;
    let series = history_series(points);
    for (k, (name, c, path)) in series.iter().enumerate() {
        chart.draw_series(LineSeries::new(path.iter().copied(), c.stroke_width(2)))?;
        let shape = if k == 0 {
            Marker::Circle
        } else {
            Marker::Square
        };
        for p in path {
            marker(area, chart.backend_coord(p), shape, *c)?;
        }
        let x = 80 + 160 * k as i32;
        marker(area, (x, 16), shape, *c)?;
        area.draw(&Text::new(name.to_string(), (x + 10, 9), font(12.5)))?;
    }
    Ok(())
}
