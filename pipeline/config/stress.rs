//! The stress file (`stress.file`): named instantaneous shocks, read and checked when the config is
//! loaded, so `check` reads it and a broken one fails before any LP is solved. Asset and tag names are
//! checked against the data later, in `run::prepare_fund`.

use super::read::read_yaml;
use super::{keys, yaml};
use crate::error::{Error, Result};
use serde::Deserialize;
use std::path::Path;

/// A stress file: named instantaneous shocks.
#[derive(Debug, Deserialize, Clone)]
#[serde(deny_unknown_fields)]
pub struct StressFile {
    pub shocks: Vec<ShockSpec>,
}

/// One named shock: a return per tag (`class:equity`) and/or per asset; an asset move beats a tag move.
#[derive(Debug, Deserialize, Clone)]
#[serde(deny_unknown_fields)]
pub struct ShockSpec {
    pub name: String,
    #[serde(default)]
    pub description: String,
    pub moves: Vec<MoveSpec>,
}

/// One move of a shock: exactly one of `tag` or `asset`, and the instantaneous simple return.
#[derive(Debug, Deserialize, Clone)]
#[serde(deny_unknown_fields)]
pub struct MoveSpec {
    pub tag: Option<String>,
    pub asset: Option<String>,
    #[serde(rename = "return")]
    pub ret: f64,
}

/// Reads and checks a stress file: its size and text lengths, its shape and ranges, and that every shock
/// has a name of its own (asset and tag names are checked against the data in `run::prepare_fund`).
pub fn load_stress(path: &Path) -> Result<StressFile> {
    let text = read_yaml(path, "stress file")?;
    parse_stress(path, &text)
}

/// Parses and checks the text of a stress file; `path` names it in messages, which also give the line.
pub fn parse_stress(path: &Path, text: &str) -> Result<StressFile> {
    if let Some(why) = yaml::overlong_text(text) {
        return Err(Error::config(path, why));
    }
    let file: StressFile = serde_yaml_ng::from_str(text)
        .map_err(|e| Error::config(path, keys::describe_yaml_error(&e)))?;
    check_shocks(&file).map_err(|(key, why)| Error::config(path, at_key(text, &key, &why)))?;
    Ok(file)
}

fn check_shocks(file: &StressFile) -> std::result::Result<(), (String, String)> {
    for (i, s) in file.shocks.iter().enumerate() {
        let name = s.name.trim();
        if name.is_empty() {
            return Err((
                format!("shocks[{i}].name"),
                "is required (the shock's name, printed in the stress table)".into(),
            ));
        }
        if let Some(first) = file.shocks[..i].iter().position(|o| o.name.trim() == name) {
            return Err((
                format!("shocks[{i}].name"),
                format!(
                    "`{name}` is already the name of shocks[{first}]; give each shock a name of its own"
                ),
            ));
        }
        for (j, m) in s.moves.iter().enumerate() {
            check_move(m).map_err(|(k, why)| {
                (
                    format!("shocks[{i}].moves[{j}]{k}"),
                    format!("in shock `{name}`: {why}"),
                )
            })?;
        }
    }
    Ok(())
}

fn check_move(m: &MoveSpec) -> std::result::Result<(), (&'static str, String)> {
    if m.tag.is_some() == m.asset.is_some() {
        return Err(("", "give exactly one of `tag` or `asset`".into()));
    }
    if !(m.ret.is_finite() && m.ret >= -1.0) {
        return Err((
            ".return",
            format!("{} must be a simple return ≥ −1 (−100%)", m.ret),
        ));
    }
    if let Some(t) = &m.tag {
        check_tag(t).map_err(|why| (".tag", why))?;
    }
    if m.asset.as_ref().is_some_and(|a| a.trim().is_empty()) {
        return Err((".asset", "is blank; give an asset code".into()));
    }
    Ok(())
}

/// Whether a `column:value` tag (stress moves, hedge ratios, the proxy's tags) holds for a row whose
/// column values `value_of` gives, the column asked for in lower case: both parts trimmed, the value
/// compared in any case. A text without `:` holds for no row.
pub fn tag_holds<'a>(tag: &str, value_of: impl Fn(&str) -> Option<&'a str>) -> bool {
    tag.split_once(':').is_some_and(|(col, val)| {
        value_of(&col.trim().to_ascii_lowercase())
            .is_some_and(|v| v.eq_ignore_ascii_case(val.trim()))
    })
}

/// A `column:value` tag with neither part blank.
pub(super) fn check_tag(t: &str) -> std::result::Result<(&str, &str), String> {
    match t.split_once(':') {
        Some((c, v)) if !c.trim().is_empty() && !v.trim().is_empty() => Ok((c.trim(), v.trim())),
        Some(_) => Err(format!(
            "`{t}` has a blank column or value; it must look like `column:value`, e.g. `class:equity`"
        )),
        None => Err(format!(
            "must look like `column:value`, e.g. `class:equity`, got `{t}`"
        )),
    }
}

/// "key (line L): why", with the line of the key in `text` when it is there, else "key: why".
fn at_key(text: &str, key: &str, why: &str) -> String {
    match yaml::locate(text, key).filter(|p| p.exact) {
        Some(p) => format!("{key} (line {}): {why}", p.line),
        None => format!("{key}: {why}"),
    }
}
