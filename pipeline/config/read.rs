//! Config and stress files as text: bounded, UTF-8, refused by what they are when they are not regular
//! files; and the config text parsed into [`RawConfig`] with messages that give the line and the nearest
//! key.

use super::raw::RawConfig;
use super::{MAX_FILE_BYTES, keys, yaml};
use crate::error::{Error, Result};
use std::path::Path;

/// Reads a config or stress file as text. A path that is not a regular file is refused by what it is,
/// without being opened (a named pipe would wait for a writer); so is a file over [`MAX_FILE_BYTES`],
/// after reading no more than that. The text must be UTF-8; a leading byte-order mark is dropped.
pub(super) fn read_yaml(path: &Path, what: &str) -> Result<String> {
    if let Some(why) = crate::error::fs::not_a_file(path) {
        let hint = if why.starts_with("is ") {
            format!("the {what} must be a YAML file")
        } else {
            "check the path".to_string()
        };
        return Err(Error::config(path, format!("{why}; {hint}")));
    }
    let bytes = crate::error::fs::read_at_most(path, MAX_FILE_BYTES)?;
    if bytes.len() as u64 > MAX_FILE_BYTES {
        return Err(Error::config(path, too_large(what)));
    }
    let text = String::from_utf8(bytes).map_err(|e| {
        let at = e.utf8_error().valid_up_to();
        let line = e.as_bytes()[..at].iter().filter(|b| **b == b'\n').count() + 1;
        Error::config(
            path,
            format!("line {line}, byte {at}: not UTF-8 text; save the {what} as UTF-8"),
        )
    })?;
    Ok(match text.strip_prefix('\u{feff}') {
        Some(rest) => rest.to_string(),
        None => text,
    })
}

fn too_large(what: &str) -> String {
    format!(
        "is larger than {MAX_FILE_BYTES} bytes ({} MiB), the most a {what} may have; a {what} is a few KB of YAML, so this is not one",
        MAX_FILE_BYTES >> 20
    )
}

/// Parses YAML text into the raw config, turning serde errors into messages with line and a suggestion.
/// Text over [`MAX_FILE_BYTES`], or with a text value longer than its bound ([`yaml`]), is refused first.
pub fn parse(path: &Path, text: &str) -> Result<RawConfig> {
    let text = text.strip_prefix('\u{feff}').unwrap_or(text);
    if text.trim().is_empty() {
        return Err(Error::config(
            path,
            "line 1: the file is empty; see config-demo/fund.yaml for a complete example",
        ));
    }
    if text.len() as u64 > MAX_FILE_BYTES {
        return Err(Error::config(path, too_large("config")));
    }
    if let Some(why) = yaml::overlong_text(text) {
        return Err(Error::config(path, why));
    }
    serde_yaml_ng::from_str::<RawConfig>(text)
        .map_err(|e| Error::config(path, keys::describe_yaml_error(&e)))
}
