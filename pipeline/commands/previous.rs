//! The fund's earlier packs, found in the archive and verified with the checks `verify` makes
//! ([`crate::signoff::check_pack`]), handed to the run as plain data ([`Past`]).
//!
//! A run looks in its archive: for each earlier as-of of the fund (newest first, up to
//! [`change::HISTORY`] − 1 of them) the highest revision, a finalised revision preferred; the newest is the
//! previous pack. A re-run (`verify --rerun`, `finalize`) looks for exactly the packs the pack's own
//! results.json names (`change.previous`, `change.history`: fund, as-of, revision and pack id) in the
//! archive the pack sits in, and verifies them again: so it compares with the same packs even after newer
//! revisions of an earlier month were written or an earlier pack was finalised (whether a pack was final
//! is taken from the record), and a pack whose predecessors were changed, removed or not copied along
//! re-runs to different bytes, which `verify --rerun` reports.

use crate::analysis::change::{self, Past, Previous};
use chrono::NaiveDate;
use serde_json::Value;
use std::path::Path;

/// The earlier packs of fund `fund` before `as_of` in the archive at `root`.
pub fn find(root: &Path, fund: &str, as_of: NaiveDate) -> Past {
    let mut dates: Vec<NaiveDate> = std::fs::read_dir(root.join(fund))
        .map(|rd| {
            rd.filter_map(|e| e.ok())
                .filter_map(|e| e.file_name().to_str()?.parse::<NaiveDate>().ok())
                .filter(|d| *d < as_of)
                .collect()
        })
        .unwrap_or_default();
    dates.sort();
    dates.reverse();
    let mut history: Vec<Previous> = dates
        .iter()
        .filter_map(|d| chosen_revision(root, fund, *d).map(|r| (d, r)))
        .take(change::HISTORY - 1)
        .map(|(d, rev)| load(root, fund, &d.to_string(), rev))
        .collect();
    history.reverse();
    past_of(root, history)
}

/// The revision a later run compares with in one as-of folder: the highest finalised one, else the
/// highest.
fn chosen_revision(root: &Path, fund: &str, as_of: NaiveDate) -> Option<u32> {
    let revs = crate::archive::revisions(&root.join(fund).join(as_of.to_string()));
    let finalised = revs
        .iter()
        .rev()
        .find(|(_, p)| crate::signoff::record(p).is_ok_and(|r| r.finalised.is_some()));
    finalised.or(revs.last()).map(|(n, _)| *n)
}

/// The past with its newest pack as the previous one, its scenarios read back.
fn past_of(root: &Path, history: Vec<Previous>) -> Past {
    let previous = history.last().cloned().map(|mut p| {
        if p.verified {
            let path = root.join(&p.folder);
            // A pack whose scenarios came from a scenario file has them as that archived input.
            p.scenarios = std::fs::read_to_string(path.join("scenarios.csv"))
                .or_else(|_| std::fs::read_to_string(path.join("inputs/scenarios.csv")))
                .ok()
                .and_then(|t| change::parse_scenarios(without_comments(&t)))
                .map(|mut sc| {
                    sc.offsets = std::fs::read_to_string(path.join("reference-scenarios.csv"))
                        .ok()
                        .and_then(|t| change::surplus_offsets(&p.results, without_comments(&t)))
                        .filter(|c| c.len() == sc.returns.len());
                    sc
                });
        }
        p
    });
    Past { previous, history }
}

/// One earlier pack, verified; its results read only when it verifies.
fn load(root: &Path, fund: &str, as_of: &str, revision: u32) -> Previous {
    let folder = format!("{fund}/{as_of}/r{revision}");
    let path = root.join(&folder);
    let problems: Vec<String> = match crate::signoff::check_pack(&path) {
        Ok(f) => f
            .into_iter()
            .map(|f| format!("{}: {}", f.file, f.problem))
            .collect(),
        Err(e) => vec![e.to_string().replace('\n', " ")],
    };
    let results: Value = if problems.is_empty() {
        std::fs::read(path.join("results.json"))
            .ok()
            .and_then(|b| serde_json::from_slice(&b).ok())
            .unwrap_or_default()
    } else {
        Value::Null
    };
    Previous {
        pack_id: crate::archive::recorded_id(&path).unwrap_or_default(),
        as_of: as_of.to_string(),
        revision,
        folder,
        verified: problems.is_empty(),
        final_pack: crate::signoff::record(&path).is_ok_and(|r| r.finalised.is_some()),
        problems,
        results,
        scenarios: None,
    }
}

/// The earlier packs a pack's own results.json names, looked up in the archive the pack sits in and
/// verified again (for re-runs; see the module doc). `fund` is the fund's short name from the archived
/// config; a recorded as-of that is not a date is ignored, so no recorded text can lead outside the fund's
/// folder.
pub fn recorded(pack: &Path, fund: &str) -> Past {
    let results: Value = std::fs::read(pack.join("results.json"))
        .ok()
        .and_then(|b| serde_json::from_slice(&b).ok())
        .unwrap_or_default();
    let Some(root) = crate::archive::root_of(pack) else {
        return Past::default();
    };
    let entries = results["change"]["history"]
        .as_array()
        .cloned()
        .unwrap_or_default();
    let n = entries.len().saturating_sub(1);
    let history: Vec<Previous> = entries[..n]
        .iter()
        .filter_map(|e| {
            let as_of: NaiveDate = e["as_of"].as_str()?.parse().ok()?;
            let rev = u32::try_from(e["revision"].as_u64()?).ok()?;
            let mut p = load(root, fund, &as_of.to_string(), rev);
            p.final_pack = e["final"] == true;
            let id = e["pack_id"].as_str().unwrap_or_default();
            if p.pack_id != id {
                p.problems.push(format!(
                    "{}: holds pack id {}, not the recorded {id}",
                    crate::archive::MANIFEST,
                    p.pack_id
                ));
                p.verified = false;
                p.results = Value::Null;
            }
            Some(p)
        })
        .collect();
    past_of(root, history)
}

/// A CSV's text after its leading `#` comment lines (a scenario file may start with some; tailpack's own
/// `scenarios.csv` has none).
fn without_comments(text: &str) -> &str {
    let mut rest = text;
    while rest.starts_with('#') {
        rest = rest.split_once('\n').map_or("", |(_, r)| r);
    }
    rest
}
