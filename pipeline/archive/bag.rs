//! A pack folder as a BagIt bag (RFC 8493, "The BagIt File Packaging Format (V1.0)", 2018): the bag
//! declaration `bagit.txt`, a SHA-256 payload manifest, `bag-info.txt` and a SHA-256 tag manifest, so any
//! general BagIt validator checks the same files `verify` does.
//!
//! The pack's own files stay where they have always been, at the top of the pack folder; to the bag they
//! are tag files (RFC 8493 §2.2.4 lets a bag hold further tag files in its base folder and in tag
//! folders such as `inputs/`), each listed with its digest in `tagmanifest-sha256.txt`. The payload
//! folder `data/` is empty, so the payload manifest is empty and `Payload-Oxum` is `0.0`. This keeps every
//! path of the pack (the pack id's listing, results.json's inputs, the index) as it was, and packs written
//! before they were bags differ from bags only by the bag's files.
//!
//! The bag's files are written last, when the pack is complete, and rewritten by `sign` and `finalize`
//! ([`refresh`]): the sign-off status and the bagging date change, and the tag manifest then lists the new
//! `signoff.json` and `pack-final.pdf`. This module reads and writes files only inside one pack folder.

use super::{Finding, atomic_write, entries_below, finding, regular_file, sha};
use crate::error::{Result, fs};
use chrono::NaiveDate;
use std::path::Path;

/// The bag declaration.
pub const DECLARATION: &str = "bagit.txt";
/// The payload manifest (SHA-256, RFC 8493 §2.1.3).
pub const PAYLOAD_MANIFEST: &str = "manifest-sha256.txt";
/// The tag manifest (SHA-256, RFC 8493 §2.2.1).
pub const TAG_MANIFEST: &str = "tagmanifest-sha256.txt";
/// The bag's metadata (RFC 8493 §2.2.2).
pub const INFO: &str = "bag-info.txt";
/// The payload folder.
pub const PAYLOAD: &str = "data";
/// The bag's own files at the top of a pack folder.
pub const FILES: [&str; 4] = [DECLARATION, PAYLOAD_MANIFEST, INFO, TAG_MANIFEST];

/// `bagit.txt` as RFC 8493 §2.1.1 gives it for version 1.0.
const DECLARATION_TEXT: &str = "BagIt-Version: 1.0\nTag-File-Character-Encoding: UTF-8\n";

/// Labels of `bag-info.txt`: the RFC's reserved ones where they fit (§2.2.2), our own for the rest.
pub mod label {
    /// Reserved: the software that made the bag (`tailpack/<version>`).
    pub const AGENT: &str = "Bag-Software-Agent";
    /// Reserved: the date the bag was last written (run, sign or finalize), YYYY-MM-DD.
    pub const DATE: &str = "Bagging-Date";
    /// Reserved: the pack id, the bag's identifier.
    pub const ID: &str = "External-Identifier";
    /// Reserved: the revisions of one fund and month form a group (`<fund folder>/<as-of>`).
    pub const GROUP: &str = "Bag-Group-Identifier";
    /// Reserved: octet count and file count of the payload.
    pub const OXUM: &str = "Payload-Oxum";
    /// The fund's name as its config gives it.
    pub const FUND: &str = "Fund-Name";
    /// The fund's folder in the archive (its short name).
    pub const FOLDER: &str = "Fund-Folder";
    /// The as-of date of the pack.
    pub const AS_OF: &str = "As-Of-Date";
    /// The pack's revision number.
    pub const REVISION: &str = "Pack-Revision";
    /// `draft`, `signing` or `final`, as the sign-off record makes it.
    pub const STATUS: &str = "Sign-Off-Status";
    /// The tailpack version and git commit that wrote the pack.
    pub const TOOL: &str = "Tool-Version";
}

/// What `bag-info.txt` says of a new pack.
pub struct Info<'a> {
    pub fund: &'a str,
    pub folder: &'a str,
    pub as_of: &'a str,
    pub revision: u32,
    pub pack_id: &'a str,
    pub status: &'a str,
    pub bagged: NaiveDate,
}

/// Whether a pack folder is a bag (packs written before packs were bags hold no `bagit.txt`).
pub fn is_bag(pack: &Path) -> bool {
    std::fs::symlink_metadata(pack.join(DECLARATION)).is_ok()
}

/// The bagging date: `SOURCE_DATE_EPOCH` when set (reproducible archives), else today's UTC date.
pub fn today() -> NaiveDate {
    std::env::var("SOURCE_DATE_EPOCH")
        .ok()
        .and_then(|s| s.trim().parse::<i64>().ok())
        .and_then(|t| chrono::DateTime::from_timestamp(t, 0))
        .unwrap_or_else(chrono::Utc::now)
        .date_naive()
}

/// Makes a complete pack folder a bag: declaration, empty payload folder and manifest, bag-info, and
/// last the tag manifest over every other file.
pub fn write(pack: &Path, info: &Info) -> Result<()> {
    fs::write(&pack.join(DECLARATION), DECLARATION_TEXT)?;
    fs::create_dir_all(&pack.join(PAYLOAD))?;
    fs::write(&pack.join(PAYLOAD_MANIFEST), payload_manifest(pack)?)?;
    let fields = vec![
        (
            label::AGENT,
            format!("tailpack/{}", env!("CARGO_PKG_VERSION")),
        ),
        (label::DATE, info.bagged.to_string()),
        (label::ID, info.pack_id.to_string()),
        (label::GROUP, format!("{}/{}", info.folder, info.as_of)),
        (label::OXUM, oxum(pack)),
        (label::FUND, info.fund.to_string()),
        (label::FOLDER, info.folder.to_string()),
        (label::AS_OF, info.as_of.to_string()),
        (label::REVISION, info.revision.to_string()),
        (label::STATUS, info.status.to_string()),
        (
            label::TOOL,
            format!(
                "tailpack {} (git {})",
                env!("CARGO_PKG_VERSION"),
                super::GIT_COMMIT
            ),
        ),
    ];
    let fields: Vec<(String, String)> = fields
        .into_iter()
        .map(|(l, v)| (l.to_string(), v))
        .collect();
    fs::write(&pack.join(INFO), info_text(&fields))?;
    fs::write(&pack.join(TAG_MANIFEST), tag_manifest(pack)?)
}

/// Rewrites a bag's `bag-info.txt` (new status and bagging date, the payload's oxum) and then its tag
/// manifest, after `sign` or `finalize` changed the pack's sign-off files. A pack that is not a bag (one
/// written before packs were bags) is left as it is.
pub fn refresh(pack: &Path, status: &str, bagged: NaiveDate) -> Result<()> {
    if !is_bag(pack) {
        return Ok(());
    }
    let mut fields = read_info(pack);
    set(&mut fields, label::STATUS, status.to_string());
    set(&mut fields, label::DATE, bagged.to_string());
    set(&mut fields, label::OXUM, oxum(pack));
    atomic_write(&pack.join(INFO), info_text(&fields).as_bytes())?;
    atomic_write(&pack.join(TAG_MANIFEST), tag_manifest(pack)?.as_bytes())
}

fn set(fields: &mut Vec<(String, String)>, label: &str, value: String) {
    match fields.iter_mut().find(|(l, _)| l == label) {
        Some(f) => f.1 = value,
        None => fields.push((label.to_string(), value)),
    }
}

/// `Label: value` lines; a value is one line (control characters, such as a line break in a fund name,
/// become spaces).
fn info_text(fields: &[(String, String)]) -> String {
    fields
        .iter()
        .map(|(l, v)| {
            let v: String = v
                .chars()
                .map(|c| if c.is_control() { ' ' } else { c })
                .collect();
            format!("{l}: {}\n", v.trim())
        })
        .collect()
}

/// The labels and values of `bag-info.txt`, in file order (continuation lines, RFC 8493 §2.2.2, joined).
fn read_info(pack: &Path) -> Vec<(String, String)> {
    let text = regular_file(&pack.join(INFO))
        .and_then(|b| String::from_utf8(b).ok())
        .unwrap_or_default();
    let mut out: Vec<(String, String)> = Vec::new();
    for line in text.lines() {
        if line.starts_with([' ', '\t']) {
            if let Some(last) = out.last_mut() {
                last.1.push(' ');
                last.1.push_str(line.trim());
            }
        } else if let Some((l, v)) = line.split_once(':') {
            out.push((l.trim().to_string(), v.trim().to_string()));
        }
    }
    out
}

/// A value of `bag-info.txt`, when the label is there.
pub fn info_value(pack: &Path, label: &str) -> Option<String> {
    read_info(pack)
        .into_iter()
        .find(|(l, _)| l == label)
        .map(|(_, v)| v)
}

/// Every regular file of the payload folder, relative to the pack, sorted.
fn payload_files(pack: &Path) -> Vec<String> {
    entries_below(&pack.join(PAYLOAD))
        .into_iter()
        .filter(|(_, m)| m.is_file())
        .map(|(rel, _)| format!("{PAYLOAD}/{rel}"))
        .collect()
}

/// Every regular file outside the payload folder but the tag manifests themselves, sorted.
fn tag_files(pack: &Path) -> Vec<String> {
    entries_below(pack)
        .into_iter()
        .filter(|(rel, m)| {
            let tag_manifest = !rel.contains('/') && rel.starts_with("tagmanifest-");
            m.is_file() && !rel.starts_with(&format!("{PAYLOAD}/")) && !tag_manifest
        })
        .map(|(rel, _)| rel)
        .collect()
}

/// `Payload-Oxum`: octets and number of the payload's files (RFC 8493 §2.2.2).
fn oxum(pack: &Path) -> String {
    let files = payload_files(pack);
    let octets: u64 = files
        .iter()
        .filter_map(|f| std::fs::symlink_metadata(pack.join(f)).ok())
        .map(|m| m.len())
        .sum();
    format!("{octets}.{}", files.len())
}

fn payload_manifest(pack: &Path) -> Result<String> {
    manifest_of(pack, &payload_files(pack))
}

fn tag_manifest(pack: &Path) -> Result<String> {
    manifest_of(pack, &tag_files(pack))
}

/// Manifest lines `<sha256>  <path>` (RFC 8493 §2.1.3), paths percent-encoded where the RFC asks.
fn manifest_of(pack: &Path, files: &[String]) -> Result<String> {
    let mut out = String::new();
    for f in files {
        let bytes = fs::read(&pack.join(f))?;
        out.push_str(&format!("{}  {}\n", sha(&bytes), encode(f)));
    }
    Ok(out)
}

/// RFC 8493 §2.1.3: a line break or carriage return in a path is written `%0A`/`%0D`, and so `%` as `%25`.
fn encode(path: &str) -> String {
    path.replace('%', "%25")
        .replace('\n', "%0A")
        .replace('\r', "%0D")
}

fn decode(path: &str) -> String {
    path.replace("%0A", "\n")
        .replace("%0a", "\n")
        .replace("%0D", "\r")
        .replace("%0d", "\r")
        .replace("%25", "%")
}

/// Every problem of a bag: its declaration, its payload folder, both manifests (each listed file's
/// digest, and every file listed — stricter than RFC 8493, which lets tag files go unlisted), and
/// `bag-info.txt`'s pack id and oxum against the pack. Empty for a pack that is not a bag.
pub fn check(pack: &Path, pack_id: &str) -> Vec<Finding> {
    if !is_bag(pack) {
        return vec![];
    }
    let mut out = Vec::new();
    if regular_file(&pack.join(DECLARATION)).as_deref() != Some(DECLARATION_TEXT.as_bytes()) {
        out.push(finding(
            DECLARATION,
            "is not the BagIt 1.0 declaration tailpack writes",
        ));
    }
    match std::fs::symlink_metadata(pack.join(PAYLOAD)) {
        Ok(m) if m.is_dir() => {}
        _ => out.push(finding(
            PAYLOAD,
            "is missing or not a folder: a bag holds its payload folder data/",
        )),
    }
    for (rel, m) in entries_below(&pack.join(PAYLOAD)) {
        if !m.is_file() && !m.is_dir() {
            out.push(finding(
                &format!("{PAYLOAD}/{rel}"),
                "is a symbolic link or special file; a bag's payload holds only regular files",
            ));
        }
    }
    out.extend(check_manifest(pack, PAYLOAD_MANIFEST, &payload_files(pack)));
    out.extend(check_manifest(pack, TAG_MANIFEST, &tag_files(pack)));
    out.extend(check_info(pack, pack_id));
    out
}

/// A manifest against the files it must list: each line's digest, missing files, files not listed.
fn check_manifest(pack: &Path, name: &str, expected: &[String]) -> Vec<Finding> {
    let Some(text) = regular_file(&pack.join(name)).and_then(|b| String::from_utf8(b).ok()) else {
        return vec![finding(name, "is missing or not text")];
    };
    let mut out = Vec::new();
    let mut listed = Vec::new();
    for line in text.lines() {
        let Some((hash, path)) = line.split_once([' ', '\t']) else {
            out.push(finding(name, format!("malformed line `{line}`")));
            continue;
        };
        let path = decode(path.trim_start());
        if !super::plain_path(&path) {
            out.push(finding(
                name,
                format!("lists `{path}`, not a path in the bag"),
            ));
            continue;
        }
        match regular_file(&pack.join(&path)) {
            Some(bytes) if sha(&bytes).eq_ignore_ascii_case(hash) => {}
            Some(_) => out.push(finding(
                &path,
                format!("was changed: its SHA-256 differs from {name}"),
            )),
            None => out.push(finding(&path, format!("is listed in {name} but missing"))),
        }
        listed.push(path);
    }
    for f in expected.iter().filter(|f| !listed.contains(f)) {
        out.push(finding(f, format!("is not listed in {name}")));
    }
    out
}

/// `bag-info.txt` names this pack and its payload's size.
fn check_info(pack: &Path, pack_id: &str) -> Vec<Finding> {
    let mut out = Vec::new();
    if info_value(pack, label::ID).as_deref() != Some(pack_id) {
        out.push(finding(
            INFO,
            format!(
                "its {} is not the pack id recorded in manifest.json",
                label::ID
            ),
        ));
    }
    if info_value(pack, label::OXUM).as_deref() != Some(oxum(pack).as_str()) {
        out.push(finding(
            INFO,
            format!(
                "its {} does not match the payload folder (octets.files {})",
                label::OXUM,
                oxum(pack)
            ),
        ));
    }
    out
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn paths_are_percent_encoded_as_rfc_8493_asks_and_read_back() {
        // RFC 8493 §2.1.3: CR, LF and % in a file path are written %0D, %0A and %25.
        let path = "inputs/templates/50%\nodd\rname.typ";
        assert_eq!(encode(path), "inputs/templates/50%25%0Aodd%0Dname.typ");
        assert_eq!(decode(&encode(path)), path);
        assert_eq!(
            decode("a%250A"),
            "a%0A",
            "an encoded % is not read as the start of another"
        );
    }

    #[test]
    fn bag_info_keeps_one_line_per_label_and_reads_continuations() {
        let fields = vec![("Fund-Name".to_string(), "A\nB\tFund".to_string())];
        assert_eq!(info_text(&fields), "Fund-Name: A B Fund\n");
        let dir = tempfile::tempdir().unwrap();
        std::fs::write(
            dir.path().join(INFO),
            "Fund-Name: Long\n  continued\nPayload-Oxum: 0.0\n",
        )
        .unwrap();
        assert_eq!(
            info_value(dir.path(), "Fund-Name").as_deref(),
            Some("Long continued")
        );
        assert_eq!(info_value(dir.path(), label::OXUM).as_deref(), Some("0.0"));
    }
}
