//! Stage 7, archive: pack identity, revisions, the manifest, the index, the archive lock, and verification.
//!
//! A pack is a folder `<root>/<fund>/<as-of>/r<N>/` holding its outputs, a copy of every input under
//! `inputs/` and `manifest.json`. `inputs.sha256` lists every archived input in `sha256sum` format, sorted
//! by path; the **pack id is the SHA-256 of that file's bytes**, so anyone can recompute it with
//! `sha256sum -c inputs.sha256 && sha256sum inputs.sha256`. Identical inputs give the same pack id, so a
//! re-run is a no-op; changed inputs give the next revision. Packs are assembled in a hidden temporary
//! folder inside the archive and renamed into place when complete; a file lock serialises runs.

use crate::config::Config;
use crate::config::inputs::{Input, RunRecord};
use crate::error::{Error, Result, fs};
use chrono::NaiveDate;
use serde_json::{Value, json};
use sha2::{Digest, Sha256};
use std::path::{Path, PathBuf};
use std::time::{Duration, Instant};

pub mod bag;
pub mod html;

/// Name of the inputs listing whose digest is the pack id.
pub const LISTING: &str = "inputs.sha256";
/// Name of the manifest.
pub const MANIFEST: &str = "manifest.json";
/// Name of the note written into a revision that replaces an earlier one.
pub const REVISION_NOTE: &str = "revision-note.txt";
/// How long a run, `sign` or `finalize` waits for another's archive lock by default.
pub const LOCK_TIMEOUT: Duration = Duration::from_secs(600);
/// The git commit the binary was built from ("unknown" outside a git checkout).
pub const GIT_COMMIT: &str = env!("TAILPACK_GIT_COMMIT");

/// An input file with its digest, as listed in results.json and the manifest.
#[derive(Debug, Clone, serde::Serialize, schemars::JsonSchema)]
pub struct InputFile {
    /// What the file is (`config`, `prices`, `assets`, `holdings`, `template`, …).
    pub role: &'static str,
    /// Its path in the pack (`inputs/…`).
    pub path: String,
    /// SHA-256 of its bytes, hex.
    pub sha256: String,
    /// Its size in bytes.
    pub bytes: u64,
}

/// Lower-case hex encoding (of digests, keys and signatures).
pub fn hex(bytes: &[u8]) -> String {
    use std::fmt::Write as _;
    bytes
        .iter()
        .fold(String::with_capacity(bytes.len() * 2), |mut s, b| {
            let _ = write!(s, "{b:02x}");
            s
        })
}

/// One archived input: where it came from and its bytes.
#[derive(Debug, Clone)]
pub struct Archived {
    pub role: &'static str,
    /// Path below `inputs/`.
    pub name: String,
    pub source: Option<PathBuf>,
    /// Its bytes, held from planning to writing; empty for a file above [`HELD_UP_TO`] bytes, which is
    /// hashed as it is read and copied from `source` into the pack (and hashed again while copied).
    pub bytes: Vec<u8>,
    /// Its size in bytes.
    pub len: u64,
    pub sha256: String,
}

/// Inputs up to this size are held in memory from planning to writing; larger ones (a scenario file of
/// 2,000 assets × 100,000 scenarios is 1.7 GB) are streamed twice instead of held.
pub const HELD_UP_TO: u64 = 64 << 20;

/// Everything known about a pack before it is computed.
#[derive(Debug, Clone)]
pub struct Plan {
    pub files: Vec<Archived>,
    pub listing: String,
    pub pack_id: String,
    pub folder: PathBuf,
}

fn sha(bytes: &[u8]) -> String {
    hex(&Sha256::digest(bytes))
}

fn archived(role: &'static str, name: String, source: Option<PathBuf>, bytes: Vec<u8>) -> Archived {
    let sha256 = sha(&bytes);
    Archived {
        role,
        name,
        source,
        len: bytes.len() as u64,
        bytes,
        sha256,
    }
}

/// An input file as archived: held when small, else hashed while streamed ([`HELD_UP_TO`]).
fn archived_file(role: &'static str, name: String, path: &Path) -> Result<Archived> {
    let len = std::fs::metadata(path).map_or(0, |m| m.len());
    if len <= HELD_UP_TO {
        return Ok(archived(
            role,
            name,
            Some(path.to_path_buf()),
            fs::read(path)?,
        ));
    }
    let (sha256, len) = stream(path, None)?;
    Ok(Archived {
        role,
        name,
        source: Some(path.to_path_buf()),
        bytes: Vec::new(),
        len,
        sha256,
    })
}

/// SHA-256 (hex) and length of the file at `path`, read in blocks; with `copy`, each block is written
/// there too.
fn stream(path: &Path, copy: Option<&Path>) -> Result<(String, u64)> {
    use std::io::{Read, Write};
    let mut from = fs::open(path)?;
    let mut to = copy
        .map(fs::create)
        .transpose()?
        .map(std::io::BufWriter::new);
    let mut hasher = Sha256::new();
    let mut buf = vec![0u8; 1 << 20];
    let mut len = 0u64;
    loop {
        let n = from
            .read(&mut buf)
            .map_err(|e| Error::data(path, format!("cannot be read: {e}")))?;
        if n == 0 {
            break;
        }
        hasher.update(&buf[..n]);
        if let (Some(t), Some(c)) = (to.as_mut(), copy) {
            t.write_all(&buf[..n])
                .map_err(|e| Error::data(c, format!("cannot be written: {e}")))?;
        }
        len += n as u64;
    }
    if let (Some(t), Some(c)) = (to.as_mut(), copy) {
        t.flush()
            .map_err(|e| Error::data(c, format!("cannot be written: {e}")))?;
    }
    Ok((hex(&hasher.finalize()), len))
}

/// Reads every input of a run, as the registry of inputs lists them ([`Input::ALL`]: config, data files,
/// stress file, effective templates, run record), and derives the listing and the pack id from them.
pub fn plan(cfg: &Config, as_of: NaiveDate) -> Result<Plan> {
    let mut files = Vec::new();
    for &kind in Input::ALL {
        files.extend(archive_input(cfg, kind, as_of)?);
    }
    files.sort_by(|a, b| a.name.cmp(&b.name));
    let listing: String = files
        .iter()
        .map(|f| format!("{}  inputs/{}\n", f.sha256, f.name))
        .collect();
    let pack_id = sha(listing.as_bytes());
    let folder = cfg.out_root.join(&cfg.short_name).join(as_of.to_string());
    Ok(Plan {
        files,
        listing,
        pack_id,
        folder,
    })
}

/// The archived files of one kind of input: none when the config names no such input.
fn archive_input(cfg: &Config, kind: Input, as_of: NaiveDate) -> Result<Vec<Archived>> {
    match kind {
        Input::Config
        | Input::Prices
        | Input::Assets
        | Input::Holdings
        | Input::Fx
        | Input::Scenarios
        | Input::Stress => {
            let Some(p) = cfg.input(kind) else {
                return Ok(vec![]);
            };
            Ok(vec![archived_file(kind.role(), kind.archived_name(p), p)?])
        }
        Input::Templates => templates(cfg),
        Input::Run => Ok(vec![archived(
            kind.role(),
            kind.archived_name(Path::new("")),
            None,
            RunRecord::of(cfg, as_of).bytes(),
        )]),
    }
}

/// The effective template files: built-in defaults not overridden, plus every file of the custom folder
/// as the typesetter sees it (`report::templates::custom`, the one checked listing of the folder).
fn templates(cfg: &Config) -> Result<Vec<Archived>> {
    let mut custom = Vec::new();
    let (role, folder) = (
        Input::Templates.role(),
        Input::Templates.archived_name(Path::new("")),
    );
    for f in crate::report::templates::custom(cfg)? {
        custom.push(archived(
            role,
            format!("{folder}/{}", f.rel),
            Some(f.path),
            f.bytes,
        ));
    }
    let mut out: Vec<Archived> = crate::report::templates::DEFAULTS
        .iter()
        .filter(|(name, _)| !custom.iter().any(|c| c.name == format!("{folder}/{name}")))
        .map(|(name, text)| {
            archived(
                role,
                format!("{folder}/{name}"),
                None,
                text.as_bytes().to_vec(),
            )
        })
        .collect();
    out.extend(custom);
    Ok(out)
}

/// The inputs as listed in results.json and the manifest (archived names, never machine-specific paths).
pub fn input_list(plan: &Plan) -> Vec<InputFile> {
    plan.files
        .iter()
        .map(|f| InputFile {
            role: f.role,
            path: format!("inputs/{}", f.name),
            sha256: f.sha256.clone(),
            bytes: f.len,
        })
        .collect()
}

/// Revisions of a fund/as-of folder, ascending: (number, folder).
pub fn revisions(folder: &Path) -> Vec<(u32, PathBuf)> {
    let Ok(rd) = std::fs::read_dir(folder) else {
        return vec![];
    };
    let mut out: Vec<(u32, PathBuf)> = rd
        .filter_map(|e| e.ok())
        .filter_map(|e| {
            e.file_name()
                .to_str()
                .and_then(|n| n.strip_prefix('r'))
                .and_then(|n| n.parse().ok())
                .map(|k| (k, e.path()))
        })
        .filter(|(_, p)| p.join(MANIFEST).is_file())
        .collect();
    out.sort();
    out
}

/// The pack id recorded in a pack's manifest.
pub fn recorded_id(pack: &Path) -> Option<String> {
    let m: Value = serde_json::from_slice(&std::fs::read(pack.join(MANIFEST)).ok()?).ok()?;
    m["pack_id"].as_str().map(str::to_string)
}

/// The existing revision with the same pack id, if any.
pub fn identical(plan: &Plan) -> Option<PathBuf> {
    revisions(&plan.folder)
        .into_iter()
        .map(|(_, p)| p)
        .find(|p| recorded_id(p).as_deref() == Some(plan.pack_id.as_str()))
}

/// Inputs whose digest differs from the latest revision's listing (added, removed or changed).
pub fn changed_inputs(previous: &Path, plan: &Plan) -> Vec<String> {
    let old = std::fs::read_to_string(previous.join(LISTING)).unwrap_or_default();
    let parse = |text: &str| -> Vec<(String, String)> {
        text.lines()
            .filter_map(|l| {
                l.split_once("  ")
                    .map(|(h, n)| (n.to_string(), h.to_string()))
            })
            .collect()
    };
    let (old, new) = (parse(&old), parse(&plan.listing));
    let mut names: Vec<String> = old.iter().chain(&new).map(|(n, _)| n.clone()).collect();
    names.sort();
    names.dedup();
    names
        .into_iter()
        .filter(|n| {
            old.iter().find(|(m, _)| m == n).map(|x| &x.1)
                != new.iter().find(|(m, _)| m == n).map(|x| &x.1)
        })
        .collect()
}

/// An exclusive lock on the archive root, released when dropped (or when the process dies).
pub struct ArchiveLock {
    _file: std::fs::File,
}

/// Takes the archive lock, waiting up to `timeout` with a message on stderr; `Error::Busy` after that.
pub fn lock(root: &Path, timeout: Duration) -> Result<ArchiveLock> {
    fs::create_dir_all(root)?;
    let path = root.join(".tailpack.lock");
    let file = std::fs::OpenOptions::new()
        .create(true)
        .truncate(false)
        .write(true)
        .open(&path)
        .map_err(|source| Error::Io {
            action: "cannot open the archive lock",
            path: path.clone(),
            source,
        })?;
    let start = Instant::now();
    let mut told = false;
    loop {
        match file.try_lock() {
            Ok(()) => return Ok(ArchiveLock { _file: file }),
            Err(std::fs::TryLockError::WouldBlock) => {
                if start.elapsed() >= timeout {
                    return Err(Error::Busy { path });
                }
                if !told {
                    // Not `eprintln!`, which panics when stderr's reader has gone away.
                    use std::io::Write as _;
                    let _ = writeln!(
                        std::io::stderr(),
                        "waiting for another tailpack run on this archive to finish (lock {})",
                        path.display()
                    );
                    told = true;
                }
                std::thread::sleep(Duration::from_millis(100));
            }
            Err(std::fs::TryLockError::Error(source)) => {
                return Err(Error::Io {
                    action: "cannot lock",
                    path,
                    source,
                });
            }
        }
    }
}

/// Removes hidden temporary folders left by interrupted runs (call with the lock held).
pub fn clean_partials(folder: &Path) {
    let Ok(rd) = std::fs::read_dir(folder) else {
        return;
    };
    for e in rd.filter_map(|e| e.ok()) {
        if e.file_name().to_string_lossy().starts_with(".partial-") {
            let _ = std::fs::remove_dir_all(e.path());
        }
    }
}

/// Writes the archived inputs, their listing, the revision note and the manifest into `tmp`.
pub fn seal(
    tmp: &Path,
    plan: &Plan,
    cfg: &Config,
    revision: u32,
    previous: Option<&Path>,
) -> Result<()> {
    for f in &plan.files {
        let p = tmp.join("inputs").join(&f.name);
        fs::create_dir_all(p.parent().expect("has parent"))?;
        match &f.source {
            Some(source) if f.bytes.len() as u64 != f.len => {
                let (sha256, _) = stream(source, Some(&p))?;
                if sha256 != f.sha256 {
                    return Err(Error::data(
                        source,
                        "changed while the run was in progress (its SHA-256 when read differs from its SHA-256 now); run again on a file that stays as it is",
                    ));
                }
            }
            _ => fs::write(&p, &f.bytes)?,
        }
    }
    fs::write(&tmp.join(LISTING), &plan.listing)?;
    let changed = previous.map(|p| changed_inputs(p, plan));
    if let (Some(prev), Some(changed)) = (previous, &changed) {
        let note = format!(
            "revision r{revision} replaces {} (pack {}); changed inputs:\n{}\n",
            prev.file_name().unwrap_or_default().to_string_lossy(),
            recorded_id(prev).unwrap_or_default(),
            changed
                .iter()
                .map(|c| format!("  {c}"))
                .collect::<Vec<_>>()
                .join("\n")
        );
        fs::write(&tmp.join(REVISION_NOTE), note)?;
    }
    let outputs = outputs(tmp)?;
    let manifest = json!({
        "manifest_version": 1,
        "pack_id": plan.pack_id,
        "pack_id_rule": "SHA-256 of the bytes of inputs.sha256 (sha256sum format, one line per archived input, sorted by path)",
        "fund": cfg.fund.name, "short_name": cfg.short_name,
        "as_of": plan.folder.file_name().map(|n| n.to_string_lossy().into_owned()),
        "revision": revision,
        "changed_inputs": changed,
        "tool": {"name": "tailpack", "version": env!("CARGO_PKG_VERSION"), "git_commit": GIT_COMMIT},
        "solver": {"backend": cfg.backend.name(), "description": crate::models::lp::backend_description(cfg.backend)},
        "options": options(cfg),
        "inputs": plan.files.iter().map(|f| json!({"role": f.role, "file": format!("inputs/{}", f.name),
            "source": f.source.as_ref().map(|s| s.display().to_string()), "sha256": f.sha256, "bytes": f.len})).collect::<Vec<_>>(),
        "outputs": outputs,
    });
    fs::write(
        &tmp.join(MANIFEST),
        serde_json::to_string_pretty(&manifest).expect("json") + "\n",
    )
}

fn options(cfg: &Config) -> Value {
    json!({
        "scenarios": cfg.scenarios, "quality": cfg.quality, "levels": cfg.levels, "confidence": cfg.confidence,
        "default_min": cfg.default_min, "default_max": cfg.default_max, "exclude": cfg.exclude, "groups": cfg.groups,
        "turnover_max": cfg.turnover_max, "cvar_cap": cfg.cap, "return_floor": cfg.floor, "analysis": cfg.analysis,
        "stress_loss_limit": cfg.stress_loss_limit, "stress_windows": cfg.stress_windows,
        "policy": cfg.policy,
    })
}

/// Digests of every output file in a pack folder (everything but the manifest and the inputs).
fn outputs(dir: &Path) -> Result<Vec<Value>> {
    let mut names: Vec<String> = std::fs::read_dir(dir)
        .map_err(|source| Error::Io {
            action: "cannot read folder",
            path: dir.into(),
            source,
        })?
        .filter_map(|e| e.ok())
        .filter(|e| e.path().is_file())
        .map(|e| e.file_name().to_string_lossy().into_owned())
        .filter(|n| n != MANIFEST && n != SIGNOFF)
        .collect();
    names.sort();
    names
        .iter()
        .map(|n| {
            let bytes = fs::read(&dir.join(n))?;
            Ok(json!({"file": n, "sha256": sha(&bytes), "bytes": bytes.len()}))
        })
        .collect()
}

/// The sign-off record's file name (written by the sign-off commands; not an output).
pub const SIGNOFF: &str = "signoff.json";
/// The final PDF written by `finalize` (its digest is kept in the sign-off record).
pub const FINAL_PDF: &str = "pack-final.pdf";

/// A pack's sign-off as the index shows it; the sign-off layer above the archive reads it from the pack.
pub struct IndexSignoff {
    /// `draft`, `signing` or `final`.
    pub status: &'static str,
    /// `role:name` of every signature, in signing order.
    pub signers: Vec<String>,
    /// The final PDF's SHA-256, once final.
    pub final_sha: Option<String>,
    /// The UTC time of every signature, as `signers` lists them (shown by index.html).
    pub signed_at: Vec<String>,
    /// `role:name` of the finaliser and the UTC time of the finalisation, once final (index.html).
    pub finalised: Option<(String, String)>,
}

/// The names of the index files at the archive root, as [`index_files`] makes them.
pub const INDEX_FILES: [&str; 3] = ["index.csv", "index.json", "index.html"];

/// Rebuilds `index.csv`, `index.json` and `index.html` at the archive root from every pack's manifest
/// and its sign-off (`signoff` tells a pack's; the archive itself knows nothing of signatures).
pub fn write_index(root: &Path, signoff: &dyn Fn(&Path) -> IndexSignoff) -> Result<()> {
    for (name, bytes) in index_files(root, signoff)? {
        atomic_write(&root.join(name), &bytes)?;
    }
    Ok(())
}

/// The index files' bytes as the packs under `root` make them now, named as [`INDEX_FILES`]; `verify`
/// on an archive root compares them with the files there.
pub fn index_files(
    root: &Path,
    signoff: &dyn Fn(&Path) -> IndexSignoff,
) -> Result<Vec<(&'static str, Vec<u8>)>> {
    let mut rows = Vec::new();
    let mut pages = Vec::new();
    for fund in sorted_dirs(root) {
        for as_of in sorted_dirs(&fund) {
            for (rev, pack) in revisions(&as_of) {
                let bytes = fs::read(&pack.join(MANIFEST))?;
                let m: Value = serde_json::from_slice(&bytes).unwrap_or(Value::Null);
                let manifest_sha = sha(&bytes);
                let IndexSignoff {
                    status,
                    signers,
                    final_sha,
                    signed_at,
                    finalised,
                } = signoff(&pack);
                let name = |p: &Path| p.file_name().map(|n| n.to_string_lossy().into_owned());
                let path = pack
                    .strip_prefix(root)
                    .unwrap_or(&pack)
                    .display()
                    .to_string();
                pages.push(html::Row {
                    folder: name(&fund).unwrap_or_default(),
                    fund: m["fund"].as_str().unwrap_or_default().to_string(),
                    as_of: name(&as_of).unwrap_or_default(),
                    revision: rev,
                    pack_id: m["pack_id"].as_str().unwrap_or_default().to_string(),
                    status: status.to_string(),
                    signers: signers.iter().cloned().zip(signed_at).collect(),
                    finalised,
                    path: path.replace('\\', "/"),
                });
                rows.push(json!({
                    "fund": name(&fund),
                    "as_of": name(&as_of),
                    "revision": rev, "pack_id": m["pack_id"], "status": status, "signers": signers,
                    "final_pdf_sha256": final_sha, "manifest_sha256": manifest_sha,
                    "path": path,
                }));
            }
        }
    }
    let mut csv = String::from(
        "fund,as_of,revision,pack_id,status,signers,final_pdf_sha256,manifest_sha256,path\n",
    );
    for r in &rows {
        csv.push_str(&index_csv_row(r));
        csv.push('\n');
    }
    let json = serde_json::to_string_pretty(&rows).expect("json") + "\n";
    Ok(vec![
        (INDEX_FILES[0], csv.into_bytes()),
        (INDEX_FILES[1], json.into_bytes()),
        (INDEX_FILES[2], html::page(&pages).into_bytes()),
    ])
}

/// One `index.csv` row, every field quoted per RFC 4180 ([`crate::csv_out`]): a fund folder, path or
/// signer name with a comma, quote or line break stays inside its field and cannot forge a row. The
/// signers field holds one `role:name` per line (a quoted multi-line field): `sign` refuses names with
/// control characters, so a line break is the one separator no name can contain (a `;` or `,` can).
fn index_csv_row(r: &Value) -> String {
    let s = |k: &str| r[k].as_str().map(str::to_string).unwrap_or_default();
    let signers: Vec<&str> = r["signers"]
        .as_array()
        .map(|a| a.iter().filter_map(Value::as_str).collect())
        .unwrap_or_default();
    let revision = r["revision"].to_string();
    let signers = signers.join("\n");
    crate::csv_out::row([
        s("fund").as_str(),
        &s("as_of"),
        &revision,
        &s("pack_id"),
        &s("status"),
        &signers,
        &s("final_pdf_sha256"),
        &s("manifest_sha256"),
        &s("path"),
    ])
}

fn sorted_dirs(dir: &Path) -> Vec<PathBuf> {
    let Ok(rd) = std::fs::read_dir(dir) else {
        return vec![];
    };
    let mut v: Vec<PathBuf> = rd
        .filter_map(|e| e.ok())
        .map(|e| e.path())
        .filter(|p| {
            p.is_dir()
                && !p
                    .file_name()
                    .is_some_and(|n| n.to_string_lossy().starts_with('.'))
        })
        .collect();
    v.sort();
    v
}

fn atomic_write(path: &Path, bytes: &[u8]) -> Result<()> {
    // A name unique to this process and thread: funds of one run write the index concurrently.
    let tmp = path.with_extension(
        format!(
            "{}-{:?}.tmp",
            std::process::id(),
            std::thread::current().id()
        )
        .replace(['(', ')'], ""),
    );
    fs::write(&tmp, bytes)?;
    fs::rename(&tmp, path)
}

/// One problem found by `verify`.
#[derive(Debug, Clone)]
pub struct Finding {
    pub file: String,
    pub problem: String,
}

fn finding(file: &str, problem: impl Into<String>) -> Finding {
    Finding {
        file: file.to_string(),
        problem: problem.into(),
    }
}

/// Recomputes every digest of a pack and accounts for every entry in it; returns the problems found
/// (empty when the pack is intact). `allowed` names the top-level files the sign-off layer accepts
/// besides the listed ones (`signoff.json`, and `pack-final.pdf` in a finalised pack).
pub fn verify(pack: &Path, allowed: &[&str]) -> Result<Vec<Finding>> {
    let manifest: Value = match std::fs::read(pack.join(MANIFEST))
        .ok()
        .and_then(|b| serde_json::from_slice(&b).ok())
    {
        Some(m) => m,
        None => return Ok(vec![finding(MANIFEST, "is missing or not valid JSON")]),
    };
    let mut out = Vec::new();
    let listed = check_listing(pack, &manifest, &mut out);
    let outputs = check_outputs(pack, &manifest, &mut out);
    let mut allowed = allowed.to_vec();
    let bagged = bag::is_bag(pack);
    if bagged {
        allowed.extend(bag::FILES);
    }
    out.extend(unlisted(pack, &listed, &outputs, &allowed, bagged));
    out.extend(check_index(pack));
    Ok(out)
}

/// Checks `inputs.sha256` against the pack id and every archived input against it; returns the listed
/// paths (relative to the pack).
fn check_listing(pack: &Path, manifest: &Value, out: &mut Vec<Finding>) -> Vec<String> {
    let listing = std::fs::read_to_string(pack.join(LISTING)).unwrap_or_default();
    if sha(listing.as_bytes()) != manifest["pack_id"].as_str().unwrap_or("") {
        out.push(finding(
            LISTING,
            "its digest is not the pack id recorded in manifest.json",
        ));
    }
    let mut listed = Vec::new();
    for line in listing.lines() {
        let Some((hash, name)) = line.split_once("  ") else {
            out.push(finding(LISTING, format!("malformed line `{line}`")));
            continue;
        };
        if !name.starts_with("inputs/") || !plain_path(name) {
            out.push(finding(
                LISTING,
                format!("lists `{name}`, which is not a path below inputs/"),
            ));
            continue;
        }
        listed.push(name.to_string());
        match regular_file(&pack.join(name)) {
            Some(bytes) if sha(&bytes) == hash => {}
            Some(_) => out.push(finding(
                name,
                "was changed: its SHA-256 differs from inputs.sha256",
            )),
            None => out.push(finding(name, "is missing")),
        }
    }
    listed
}

/// A relative path of normal components only (no `..`, `.`, root or empty part).
fn plain_path(name: &str) -> bool {
    !name.is_empty()
        && name
            .split('/')
            .all(|c| !c.is_empty() && c != "." && c != "..")
        && Path::new(name)
            .components()
            .all(|c| matches!(c, std::path::Component::Normal(_)))
}

/// The bytes of a regular file (not through a symbolic link); `None` when it is missing or not one.
fn regular_file(path: &Path) -> Option<Vec<u8>> {
    let meta = std::fs::symlink_metadata(path).ok()?;
    if !meta.is_file() {
        return None;
    }
    std::fs::read(path).ok()
}

/// Checks every output listed in the manifest; returns their names.
fn check_outputs(pack: &Path, manifest: &Value, out: &mut Vec<Finding>) -> Vec<String> {
    let mut names = Vec::new();
    for o in manifest["outputs"].as_array().into_iter().flatten() {
        let name = o["file"].as_str().unwrap_or("");
        if !plain_path(name) || name.contains('/') {
            out.push(finding(
                MANIFEST,
                format!("lists output `{name}`, which is not a file name in the pack folder"),
            ));
            continue;
        }
        names.push(name.to_string());
        match regular_file(&pack.join(name)) {
            Some(bytes) if sha(&bytes) == o["sha256"].as_str().unwrap_or("") => {}
            Some(_) => out.push(finding(
                name,
                "was changed: its SHA-256 differs from manifest.json",
            )),
            None => out.push(finding(name, "is missing")),
        }
    }
    names
}

/// Every entry of the pack, hidden or not, at any depth, that is neither listed nor allowed: files not in
/// the manifest or `inputs.sha256`, folders that hold no listed input, symbolic links and special files.
/// In a bag, the payload folder and what it holds are the bag's to account for ([`bag::check`]).
fn unlisted(
    pack: &Path,
    inputs: &[String],
    outputs: &[String],
    allowed: &[&str],
    bagged: bool,
) -> Vec<Finding> {
    let mut out = Vec::new();
    for (rel, meta) in entries_below(pack) {
        if bagged && (rel == bag::PAYLOAD || rel.starts_with(&format!("{}/", bag::PAYLOAD))) {
            continue;
        }
        let top = !rel.contains('/');
        let t = meta.file_type();
        if t.is_symlink() {
            out.push(finding(
                &rel,
                "is a symbolic link; a pack holds only regular files and folders",
            ));
        } else if t.is_dir() {
            let prefix = format!("{rel}/");
            if rel != "inputs" && !inputs.iter().any(|i| i.starts_with(&prefix)) {
                out.push(finding(
                    &rel,
                    "is a folder that holds no listed file (not part of the pack)",
                ));
            }
        } else if !t.is_file() {
            out.push(finding(
                &rel,
                format!("is {}; a pack holds only regular files", fs::kind_of(&meta)),
            ));
        } else if top {
            if rel != MANIFEST && !allowed.contains(&rel.as_str()) && !outputs.contains(&rel) {
                out.push(finding(&rel, "is not listed in manifest.json"));
            }
        } else if !inputs.contains(&rel) {
            out.push(finding(&rel, "is not listed in inputs.sha256"));
        }
    }
    out
}

/// Every entry below `dir` (hidden ones too), by path relative to it with `/`, sorted; symbolic links
/// are reported as themselves and never followed, so a link loop cannot make the walk run away.
fn entries_below(dir: &Path) -> Vec<(String, std::fs::Metadata)> {
    let mut out = Vec::new();
    let mut stack = vec![dir.to_path_buf()];
    while let Some(d) = stack.pop() {
        let Ok(rd) = std::fs::read_dir(&d) else {
            continue;
        };
        for e in rd.filter_map(|e| e.ok()) {
            let p = e.path();
            let Ok(meta) = std::fs::symlink_metadata(&p) else {
                continue;
            };
            if meta.is_dir() {
                stack.push(p.clone());
            }
            let rel = p
                .strip_prefix(dir)
                .expect("below dir")
                .to_string_lossy()
                .replace('\\', "/");
            out.push((rel, meta));
        }
    }
    out.sort_by(|a, b| a.0.cmp(&b.0));
    out
}

/// The archive's root for a pack at `<root>/<fund>/<as-of>/r<N>`.
pub fn root_of(pack: &Path) -> Option<&Path> {
    pack.parent().and_then(Path::parent).and_then(Path::parent)
}

/// The archive index's row for a pack, when the pack sits in an archive with an index.
pub fn index_row(pack: &Path) -> Option<Value> {
    let root = root_of(pack)?;
    let rows: Vec<Value> =
        serde_json::from_slice(&std::fs::read(root.join("index.json")).ok()?).ok()?;
    let rel = pack
        .strip_prefix(root)
        .unwrap_or(pack)
        .display()
        .to_string();
    rows.into_iter().find(|r| r["path"] == rel.as_str())
}

/// Locks of a pack being signed or finalised: the archive lock when the pack sits in an archive (so the
/// index is rewritten by one process at a time), and an advisory lock on the pack folder itself, so two
/// `sign` commands never both read the old record and one statement is lost.
pub struct PackLock {
    _archive: Option<ArchiveLock>,
    _folder: std::fs::File,
}

/// Takes the pack's locks (waiting up to `timeout` for the archive lock; `Error::Busy` after that).
pub fn lock_pack(pack: &Path, timeout: Duration) -> Result<PackLock> {
    let archive = match root_of(pack) {
        Some(root) if root.join(".tailpack.lock").exists() || root.join("index.json").exists() => {
            Some(lock(root, timeout)?)
        }
        _ => None,
    };
    let folder = std::fs::File::open(pack).map_err(|source| Error::Io {
        action: "cannot open the pack folder",
        path: pack.to_path_buf(),
        source,
    })?;
    folder.lock().map_err(|source| Error::Io {
        action: "cannot lock",
        path: pack.to_path_buf(),
        source,
    })?;
    Ok(PackLock {
        _archive: archive,
        _folder: folder,
    })
}

/// The archive index (two levels above `r<N>/<as-of>/<fund>`) records each manifest's digest.
fn check_index(pack: &Path) -> Vec<Finding> {
    let Some(row) = index_row(pack) else {
        return vec![];
    };
    let actual = std::fs::read(pack.join(MANIFEST))
        .map(|b| sha(&b))
        .unwrap_or_default();
    if row["manifest_sha256"].as_str() != Some(actual.as_str()) {
        return vec![finding(
            MANIFEST,
            "was changed: its SHA-256 differs from the archive index",
        )];
    }
    vec![]
}
