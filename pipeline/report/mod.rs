//! Stage 6, report: the committee PDF (`pack.pdf`), typeset by typst from the run's results.
//!
//! The run's results become a view model, then display data, sentences and charts, then a file set that
//! typst typesets. Imports inside `report` go one way, down this graph (a file imports only files below it;
//! files on one line do not import each other):
//!
//! ```text
//! mod.rs        render: builds the typesetting job and hands it to typeset
//!   display.rs  the display model, /data/report.json (tables, facts, checks, inputs)
//!   further/    "Further analysis": mod.rs (the `further` part of the display model, its charts) over
//!               frontier.rs, stress.rs, backtest.rs, bands.rs (each part's display data and charts)
//!   policy.rs   "Position against policy": policy lines, exposures, breaches, active risk
//!   trades.rs   "Trades and costs": each model's trades from the current holdings, money traded, costs
//!   currency.rs the currency subsection of "Tail loss" and appendix B's currency table
//!   change.rs   "Since the last pack": results.json's `change` (previous pack, CVaR effects, history)
//!   valuation.rs  appendix B's valuation and unsmoothing table; the month-end and unsmoothing caveats
//!   liabilities.rs  "Liabilities and funded status": funded ratio, surplus risk, hedge ratio, rate moves
//!   charts.rs   the summary and allocation charts (SVG)
//!   text.rs     the sentences that depend on the run (summary points, caveats)
//!   draw.rs     the chart kit: canvas, type, axes, markers, legends, bars
//!   view.rs     the view model: the portfolios shown, their identities (label, aim, colour, marker),
//!               class order and sums, shared rows (column head, label-value pair)
//!   money.rs    amounts in the base currency beside the fractions, annualised return and volatility
//!   format.rs   the one number format (beside the view model; imports nothing)
//!
//!   typeset.rs  the typesetter child process under its budget
//!   pdf.rs      typesetting in this process: compile, PDF/A-2b export, template errors
//!   templates.rs  built-in templates, the custom folder's listing, fonts
//!   world.rs    the typst World: the only door to files, fonts and the date
//! ```
//!
//! `display`, `charts`, `text` and the `further` parts read the portfolios, their identities and the
//! class order from [`view`], and format every figure with [`format`]; the charts draw with [`draw`].
//! [`typeset`] runs the typesetter in a child process under a time and memory budget
//! (`report.typeset_seconds`, `report.typeset_memory_mb`), or in-process through [`pdf`]. The PDF claims
//! PDF/A-2b, is dated by the as-of date and identified by the pack id, so the same inputs give the same
//! bytes.
//!
//! May read: the [`RunResult`], the `results.json` value and the custom template folder. Writes nothing:
//! the pack writer stores the returned bytes.

pub mod change;
pub mod charts;
pub mod currency;
pub mod display;
pub mod draw;
pub mod format;
pub mod further;
pub mod liabilities;
pub mod money;
pub mod pdf;
pub mod policy;
pub mod templates;
pub mod text;
pub mod trades;
pub mod typeset;
pub mod valuation;
pub mod view;
pub mod world;

use crate::error::{Error, Result};
use crate::run::RunResult;
use pdf::MAIN;
use serde_json::Value;
use world::{Origin, WorldFile};

/// The display data file as templates read it.
pub const REPORT_JSON: &str = "/data/report.json";
/// The full results document as templates may read it.
pub const RESULTS_JSON: &str = "/data/results.json";

/// Typesets the pack PDF of a run. `results` is the `results.json` document and `pack_id` its identifier.
/// Everything is prepared in memory first; typesetting then runs under the config's budget.
pub fn render(r: &RunResult, results: &Value, pack_id: &str) -> Result<Vec<u8>> {
    render_with(r, results, pack_id, templates::custom(&r.config)?)
}

/// [`render`] with the custom template files already read: the pack writer passes the ones the archive
/// recorded, so the PDF is typeset from exactly the bytes the pack id covers.
pub fn render_with(
    r: &RunResult,
    results: &Value,
    pack_id: &str,
    custom: Vec<templates::CustomFile>,
) -> Result<Vec<u8>> {
    let job = crate::timings::time("charts", || job(r, results, pack_id, custom))?;
    let budget = budget(&r.config);
    crate::timings::time("typesetting", || typeset::run(job, &budget))
}

/// The typesetting budget of a config, and the template a breach is blamed on.
fn budget(cfg: &crate::config::Config) -> typeset::Budget {
    let template = match &cfg.templates {
        Some(dir) => format!("{} (custom template folder)", dir.display()),
        None => Origin::Builtin("main.typ").describe(MAIN),
    };
    typeset::Budget {
        seconds: cfg.typeset.seconds,
        memory_mb: cfg.typeset.memory_mb,
        config: cfg.path.clone(),
        template,
    }
}

fn job(
    r: &RunResult,
    results: &Value,
    pack_id: &str,
    custom: Vec<templates::CustomFile>,
) -> Result<pdf::Job> {
    let shown = view::portfolios(r);
    let report = display::build(r, &shown, results, pack_id);
    let (mut files, fonts) = templates::load_from(custom);
    let mut made = vec![
        generated(
            REPORT_JSON,
            serde_json::to_vec_pretty(&report).expect("display data serialises"),
        ),
        generated(
            RESULTS_JSON,
            serde_json::to_vec_pretty(results).expect("results serialise"),
        ),
    ];
    for chart in charts::all(r, &shown)?
        .into_iter()
        .chain(policy::chart(r, &shown)?)
        .chain(change::chart(results)?)
        .chain(further::charts(r, &shown)?)
    {
        made.push(generated(
            &format!("/charts/{}", chart.name),
            chart.svg.into_bytes(),
        ));
    }
    for file in made {
        refuse_shadow(&files, &file.vpath)?;
        files.push(file);
    }
    Ok(pdf::Job {
        files,
        fonts,
        today: r.data.as_of,
        pack_id: pack_id.to_string(),
    })
}

/// A custom template file may not take the name of a generated one: the typesetter would read one of the
/// two while the archive records the other.
fn refuse_shadow(files: &[WorldFile], vpath: &str) -> Result<()> {
    match files.iter().find(|f| f.vpath == vpath) {
        Some(f) => Err(Error::Template {
            file: f.origin.describe(vpath),
            line: None,
            message: format!(
                "has the name of a file tailpack generates ({vpath}); rename it: templates read the generated one there"
            ),
        }),
        None => Ok(()),
    }
}

fn generated(vpath: &str, bytes: Vec<u8>) -> WorldFile {
    WorldFile {
        vpath: vpath.into(),
        bytes,
        origin: Origin::Generated,
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn every_default_template_is_listed_once() {
        let mut names: Vec<&str> = templates::DEFAULTS.iter().map(|(n, _)| *n).collect();
        names.sort();
        names.dedup();
        assert_eq!(names.len(), templates::DEFAULTS.len());
        assert!(names.contains(&"main.typ"));
    }

    /// The files of `report` with their height in the graph of the module doc: a file may import only
    /// files lower than itself (rank 0 is the bottom).
    const GRAPH: &[(&str, u8, &str)] = &[
        ("view", 0, include_str!("view.rs")),
        ("format", 0, include_str!("format.rs")),
        ("draw", 1, include_str!("draw.rs")),
        ("text", 1, include_str!("text.rs")),
        ("charts", 2, include_str!("charts.rs")),
        ("frontier", 2, include_str!("further/frontier.rs")),
        ("stress", 2, include_str!("further/stress.rs")),
        ("backtest", 2, include_str!("further/backtest.rs")),
        ("bands", 2, include_str!("further/bands.rs")),
        ("policy", 2, include_str!("policy.rs")),
        ("valuation", 2, include_str!("valuation.rs")),
        ("currency", 2, include_str!("currency.rs")),
        ("further", 3, include_str!("further/mod.rs")),
        ("display", 4, include_str!("display.rs")),
        ("world", 0, include_str!("world.rs")),
        ("templates", 1, include_str!("templates.rs")),
        ("pdf", 2, include_str!("pdf.rs")),
        ("typeset", 3, include_str!("typeset.rs")),
    ];

    /// The `report` files a source names in code (not in comments or its tests): `super::x`,
    /// `super::super::x` and `crate::report::x`, where `further::x` names the part `x`.
    fn named(src: &str) -> Vec<String> {
        let code = src.split("#[cfg(test)]").next().unwrap_or_default();
        let ident = |s: &str| -> String {
            s.chars()
                .take_while(|c| c.is_ascii_alphanumeric() || *c == '_')
                .collect()
        };
        let mut out = Vec::new();
        for line in code.lines().filter_map(|l| l.split("//").next()) {
            let paths = line
                .match_indices("crate::report::")
                .chain(line.match_indices("super::"))
                .map(|(at, prefix)| line[at + prefix.len()..].trim_start_matches("super::"));
            for path in paths {
                let mut name = ident(path);
                if let Some(part) = path.strip_prefix("further::").map(ident)
                    && !part.is_empty()
                {
                    name = part;
                }
                if GRAPH.iter().any(|(n, _, _)| *n == name) && !out.contains(&name) {
                    out.push(name);
                }
            }
        }
        out
    }

    #[test]
    fn report_files_import_only_files_below_them() {
        for (file, rank, src) in GRAPH {
            for name in named(src) {
                let (_, below, _) = GRAPH.iter().find(|(n, _, _)| *n == name).unwrap();
                assert!(
                    below < rank,
                    "{file} imports {name}, which is not below it in the graph of report/mod.rs"
                );
            }
        }
        // The check can fail: a part naming another part is caught.
        assert_eq!(
            named("use crate::report::further::stress::worst_stress;"),
            ["stress"]
        );
        assert_eq!(
            named("use super::super::text::Caveat; // super::draw"),
            ["text"]
        );
    }
}
