//! Stage 9, sign-off: Ed25519 keys, signed statements over a pack, the signed finalisation, their checks.
//!
//! A statement names the role, the signer, the UTC time, the pack id and the SHA-256 of the pack's
//! manifest, and is signed with Ed25519 (RFC 8032) by a key listed for that role in the pack's archived
//! config. Statements are kept verbatim (the exact signed bytes) in `signoff.json`, so anyone can check
//! them with any Ed25519 implementation.
//!
//! What makes a pack FINAL is itself signed: `finalize` needs the key of one of the required roles and
//! signs a finalisation statement that names the pack id, the manifest's digest, the final PDF's digest and
//! every role signature it seals. So `pack-final.pdf` and the set of signatures cannot be changed, removed or
//! planted without a trusted key; `verify` checks all of it (see [`check_pack`]).
//!
//! This module sits above the archive: the archive checks digests and unlisted files, this module adds the
//! signature checks and tells the archive which sign-off files a pack may hold.

use crate::archive::{FINAL_PDF, Finding, MANIFEST, SIGNOFF, hex};
use crate::config::SignRole;
use crate::error::{Error, Result, fs};
use ed25519_dalek::{Signature, Signer, SigningKey, VerifyingKey};
use serde::{Deserialize, Serialize};
use sha2::{Digest, Sha256};
use std::path::{Path, PathBuf};

/// Largest key file read (a key file is 64 hex digits and a newline; anything much larger is not one).
pub const KEY_FILE_MAX_BYTES: u64 = 4096;
/// Largest `signoff.json` read by `verify` (a record of a few dozen signatures is a few kilobytes).
pub const RECORD_MAX_BYTES: u64 = 1 << 20;

/// A role's signed statement (serialised in this field order; the exact bytes are stored).
#[derive(Debug, Clone, Serialize, Deserialize, PartialEq)]
#[serde(deny_unknown_fields)]
pub struct Statement {
    pub pack_id: String,
    pub manifest_sha256: String,
    pub role: String,
    pub name: String,
    pub signed_at: String,
    pub public_key: String,
}

/// The finalisation statement: seals the final PDF and the role signatures (serialised in this order).
#[derive(Debug, Clone, Serialize, Deserialize, PartialEq)]
#[serde(deny_unknown_fields)]
pub struct FinalStatement {
    pub pack_id: String,
    pub manifest_sha256: String,
    pub final_pdf: String,
    pub final_pdf_sha256: String,
    /// The hex signatures of the role statements sealed, in record order.
    pub signatures: Vec<String>,
    pub role: String,
    pub name: String,
    pub finalised_at: String,
    pub public_key: String,
}

/// One entry of the sign-off record.
#[derive(Debug, Clone, Serialize, Deserialize, schemars::JsonSchema)]
#[serde(deny_unknown_fields)]
pub struct Entry {
    /// The statement exactly as signed (compact JSON).
    pub statement: String,
    /// Ed25519 signature over the statement's bytes, hex.
    pub signature: String,
}

/// The final PDF of a finalised pack and the signed finalisation statement that covers it.
#[derive(Debug, Clone, Serialize, Deserialize, schemars::JsonSchema)]
#[serde(deny_unknown_fields)]
pub struct Final {
    /// The final PDF's file name in the pack folder (`pack-final.pdf`).
    pub pdf: String,
    /// The final PDF's SHA-256, hex.
    pub sha256: String,
    /// The [`FinalStatement`] exactly as signed (compact JSON).
    pub statement: String,
    /// Ed25519 signature over the finalisation statement's bytes, hex.
    pub signature: String,
}

/// `signoff.json`: the role signatures of a pack, in signing order, and its finalisation once sealed.
#[derive(Debug, Clone, Serialize, Deserialize, Default, schemars::JsonSchema)]
#[serde(deny_unknown_fields)]
pub struct Record {
    /// One entry per role signature, in signing order; each statement is a role statement as compact JSON
    /// (`pack_id`, `manifest_sha256`, `role`, `name`, `signed_at`, `public_key`).
    pub signatures: Vec<Entry>,
    /// The finalisation; null until `finalize`.
    pub finalised: Option<Final>,
}

/// Short fingerprint of a public key: the first 16 hex digits of its SHA-256.
pub fn fingerprint(public_hex: &str) -> String {
    hex(&Sha256::digest(
        public_hex.trim().to_ascii_lowercase().as_bytes(),
    ))[..16]
        .to_string()
}

/// `N` bytes from exactly `2N` hex digits (surrounding whitespace allowed); `None` for anything else,
/// including non-ASCII text.
fn parse_hex<const N: usize>(text: &str) -> Option<[u8; N]> {
    let t = text.trim().as_bytes();
    if t.len() != 2 * N || !t.iter().all(u8::is_ascii_hexdigit) {
        return None;
    }
    let digit = |b: u8| (b as char).to_digit(16).expect("checked hex digit") as u8;
    let mut out = [0u8; N];
    for (i, o) in out.iter_mut().enumerate() {
        *o = digit(t[2 * i]) << 4 | digit(t[2 * i + 1]);
    }
    Some(out)
}

fn key_error(path: &Path, message: impl Into<String>) -> Error {
    Error::Key {
        path: path.to_path_buf(),
        message: message.into(),
    }
}

/// A refusal of `sign`, `finalize` or `keygen` (exit 8).
fn refused(action: &'static str, path: &Path, message: impl Into<String>) -> Error {
    Error::Refused {
        action,
        path: path.to_path_buf(),
        message: message.into(),
    }
}

/// Writes `<prefix>.key` (secret, hex, mode 0600) and `<prefix>.pub` (public, hex) from the system's random
/// source. Refuses when either file exists; neither is ever overwritten.
pub fn keygen(prefix: &Path) -> Result<String> {
    let (kfile, pfile) = key_pair_paths(prefix);
    for f in [&kfile, &pfile] {
        if std::fs::symlink_metadata(f).is_ok() {
            return Err(refused(
                "make a key pair at",
                prefix,
                format!(
                    "{} exists; a key file is never overwritten (choose another prefix, or remove the old pair yourself)",
                    f.display()
                ),
            ));
        }
    }
    let key = SigningKey::from_bytes(&random_secret()?);
    let public = hex(&key.verifying_key().to_bytes());
    write_new(&kfile, &(hex(&key.to_bytes()) + "\n"), 0o600)?;
    if let Err(e) = write_new(&pfile, &(public.clone() + "\n"), 0o644) {
        let _ = std::fs::remove_file(&kfile);
        return Err(e);
    }
    Ok(format!(
        "secret key {} (mode 0600; keep it private)\npublic key {}: {public}\nfingerprint {}\nlist the public key under signoff.roles[].keys in the fund's config\n",
        kfile.display(),
        pfile.display(),
        fingerprint(&public)
    ))
}

/// `<prefix>.key` and `<prefix>.pub` (the suffix is appended, so `keys/a.b` gives `keys/a.b.key`).
fn key_pair_paths(prefix: &Path) -> (PathBuf, PathBuf) {
    let with = |ext: &str| {
        let mut s = prefix.as_os_str().to_os_string();
        s.push(ext);
        PathBuf::from(s)
    };
    (with(".key"), with(".pub"))
}

fn random_secret() -> Result<[u8; 32]> {
    use std::io::Read;
    let mut secret = [0u8; 32];
    let urandom = Path::new("/dev/urandom");
    std::fs::File::open(urandom)
        .and_then(|mut f| f.read_exact(&mut secret))
        .map_err(|source| Error::Io {
            action: "cannot read randomness from",
            path: urandom.into(),
            source,
        })?;
    Ok(secret)
}

/// Creates a new file with `mode` (never replacing an existing one) and writes `text`.
fn write_new(path: &Path, text: &str, mode: u32) -> Result<()> {
    use std::io::Write;
    let mut opts = std::fs::OpenOptions::new();
    opts.write(true).create_new(true);
    #[cfg(unix)]
    std::os::unix::fs::OpenOptionsExt::mode(&mut opts, mode);
    #[cfg(not(unix))]
    let _ = mode;
    opts.open(path)
        .and_then(|mut f| f.write_all(text.as_bytes()).and_then(|_| f.sync_all()))
        .map_err(|source| Error::Io {
            action: "cannot create key file",
            path: path.to_path_buf(),
            source,
        })
}

/// A secret key read from its file, and a warning when other users can read the file.
pub struct LoadedKey {
    pub key: SigningKey,
    pub warning: Option<String>,
}

/// Reads a secret key file: a regular file of at most [`KEY_FILE_MAX_BYTES`] holding 64 hex digits.
/// Devices, pipes and folders are refused without reading them.
pub fn read_key(path: &Path) -> Result<LoadedKey> {
    let meta = std::fs::metadata(path).map_err(|source| match source.kind() {
        std::io::ErrorKind::NotFound => key_error(
            path,
            "does not exist: give the secret key file (PREFIX.key) that `tailpack keygen` made for the role",
        ),
        _ => Error::Io {
            action: "cannot read key file",
            path: path.to_path_buf(),
            source,
        },
    })?;
    if !meta.is_file() {
        return Err(key_error(
            path,
            format!("is {}, not a key file", fs::kind_of(&meta)),
        ));
    }
    if meta.len() > KEY_FILE_MAX_BYTES {
        return Err(key_error(
            path,
            format!(
                "is {} bytes; a secret key file made by `tailpack keygen` is 65",
                meta.len()
            ),
        ));
    }
    // A file that grew past the bound after its size was looked at fails the 64-digit check below.
    let bytes = fs::read_at_most(path, KEY_FILE_MAX_BYTES)?;
    let secret = std::str::from_utf8(&bytes)
        .ok()
        .and_then(parse_hex::<32>)
        .ok_or_else(|| {
            key_error(
                path,
                "is not a secret key: expected 64 hexadecimal digits (a file made by `tailpack keygen`)",
            )
        })?;
    Ok(LoadedKey {
        key: SigningKey::from_bytes(&secret),
        warning: readable_by_others(path, &meta),
    })
}

#[cfg(unix)]
fn readable_by_others(path: &Path, meta: &std::fs::Metadata) -> Option<String> {
    use std::os::unix::fs::PermissionsExt;
    let mode = meta.permissions().mode() & 0o777;
    (mode & 0o077 != 0).then(|| {
        format!(
            "key file {} can be read by other users (mode {mode:04o}); restrict it with `chmod 600 {}`",
            path.display(),
            path.display()
        )
    })
}

#[cfg(not(unix))]
fn readable_by_others(_: &Path, _: &std::fs::Metadata) -> Option<String> {
    None
}

/// Reads a pack's sign-off record (empty when absent); a malformed record is a verification finding.
pub fn record(pack: &Path) -> std::result::Result<Record, Finding> {
    let path = pack.join(SIGNOFF);
    let bad = |problem: String| finding(SIGNOFF, problem);
    let meta = match std::fs::symlink_metadata(&path) {
        Err(_) => return Ok(Record::default()),
        Ok(m) => m,
    };
    if !meta.is_file() {
        return Err(bad(format!(
            "is {}, not a sign-off record",
            fs::kind_of(&meta)
        )));
    }
    if meta.len() > RECORD_MAX_BYTES {
        return Err(bad(format!(
            "is {} bytes, more than a sign-off record can be ({RECORD_MAX_BYTES})",
            meta.len()
        )));
    }
    let bytes = std::fs::read(&path).map_err(|e| bad(format!("cannot be read: {e}")))?;
    serde_json::from_slice(&bytes).map_err(|e| bad(format!("is not a valid sign-off record: {e}")))
}

fn manifest_digest(pack: &Path) -> Result<String> {
    Ok(hex(&Sha256::digest(fs::read(&pack.join(MANIFEST))?)))
}

/// The roles required by the pack's archived config.
pub fn roles(pack: &Path) -> Result<Vec<SignRole>> {
    let overrides = crate::config::Overrides::default();
    Ok(crate::config::load_archived(&pack.join("inputs"), &overrides)?.signoff)
}

/// Whether `public` (hex) is trusted for `role`.
fn trusted(roles: &[SignRole], role: &str, public: &str) -> bool {
    roles.iter().any(|r| {
        r.role == role
            && r.keys
                .iter()
                .any(|k| k.trim().eq_ignore_ascii_case(public.trim()))
    })
}

fn signature_valid(public: &str, message: &str, signature: &str) -> bool {
    let (Some(pk), Some(sig)) = (parse_hex::<32>(public), parse_hex::<64>(signature)) else {
        return false;
    };
    let Ok(vk) = VerifyingKey::from_bytes(&pk) else {
        return false;
    };
    vk.verify_strict(message.as_bytes(), &Signature::from_bytes(&sig))
        .is_ok()
}

/// What a pack is bound to: its recorded pack id and its manifest's digest.
struct Binding {
    pack_id: String,
    manifest: String,
}

fn binding(pack: &Path) -> Result<Binding> {
    Ok(Binding {
        pack_id: crate::archive::recorded_id(pack).unwrap_or_default(),
        manifest: manifest_digest(pack)?,
    })
}

/// Checks every role signature of the record; returns problems (empty when all hold) and the roles with a
/// valid signature.
fn check_signatures(rec: &Record, roles: &[SignRole], b: &Binding) -> (Vec<String>, Vec<String>) {
    let mut out = Vec::new();
    let mut valid: Vec<String> = Vec::new();
    for (i, e) in rec.signatures.iter().enumerate() {
        let place = format!("signature {}", i + 1);
        let Ok(st) = serde_json::from_str::<Statement>(&e.statement) else {
            out.push(format!("{place}: the statement is not valid"));
            continue;
        };
        let mut ok = true;
        if !signature_valid(&st.public_key, &e.statement, &e.signature) {
            out.push(format!(
                "{place} (role {}): the signature does not match the statement (forged, altered or malformed)",
                st.role
            ));
            ok = false;
        }
        if st.pack_id != b.pack_id || st.manifest_sha256 != b.manifest {
            out.push(format!(
                "{place} (role {}): signed a different pack or manifest than this one",
                st.role
            ));
            ok = false;
        }
        if !trusted(roles, &st.role, &st.public_key) {
            out.push(format!(
                "{place}: key {} is not trusted for role `{}` (or the role is not required)",
                fingerprint(&st.public_key),
                st.role
            ));
            ok = false;
        }
        if rec.signatures[..i]
            .iter()
            .filter_map(|p| serde_json::from_str::<Statement>(&p.statement).ok())
            .any(|p| p.role == st.role)
        {
            out.push(format!(
                "{place}: role `{}` signed more than once; each role signs once",
                st.role
            ));
            ok = false;
        }
        if ok {
            valid.push(st.role);
        }
    }
    (out, valid)
}

/// A problem with one file of the pack.
fn finding(file: &str, problem: impl Into<String>) -> Finding {
    Finding {
        file: file.to_string(),
        problem: problem.into(),
    }
}

/// Checks the finalisation: every required role signed validly, and the signed finalisation statement
/// covers this pack, this final PDF and exactly the record's signatures.
fn check_final(
    pack: &Path,
    rec: &Record,
    f: &Final,
    roles: &[SignRole],
    valid: &[String],
    b: &Binding,
) -> Vec<Finding> {
    let mut out: Vec<Finding> = final_roles(roles, valid)
        .into_iter()
        .map(|problem| finding(SIGNOFF, problem))
        .collect();
    if f.pdf != FINAL_PDF {
        out.push(finding(
            SIGNOFF,
            format!(
                "names `{}` as the final PDF; it is always {FINAL_PDF}",
                f.pdf
            ),
        ));
        return out;
    }
    let Ok(st) = serde_json::from_str::<FinalStatement>(&f.statement) else {
        out.push(finding(
            SIGNOFF,
            "the finalisation statement is missing or not valid: nothing signed covers the final PDF",
        ));
        return out;
    };
    out.extend(
        final_statement(rec, f, &st, roles, b)
            .into_iter()
            .map(|problem| finding(SIGNOFF, problem)),
    );
    match std::fs::read(pack.join(FINAL_PDF)) {
        Ok(bytes) if hex(&Sha256::digest(&bytes)) == st.final_pdf_sha256 => {}
        Ok(_) => out.push(finding(
            FINAL_PDF,
            "was changed: its SHA-256 differs from the signed finalisation",
        )),
        Err(_) => out.push(finding(FINAL_PDF, "is missing")),
    }
    out
}

/// A final record needs required roles, every one of them with a valid signature.
fn final_roles(roles: &[SignRole], valid: &[String]) -> Option<String> {
    let missing: Vec<&str> = roles
        .iter()
        .filter(|r| !valid.contains(&r.role))
        .map(|r| r.role.as_str())
        .collect();
    if roles.is_empty() {
        Some("is marked final, but the pack's config requires no sign-off roles".into())
    } else if !missing.is_empty() {
        Some(format!(
            "is marked final without a valid signature of: {}",
            missing.join(", ")
        ))
    } else {
        None
    }
}

/// What is wrong with a parsed finalisation statement: its signature, its key's trust, the pack and
/// manifest it names, the role signatures it sealed, and the final PDF digest it signed.
fn final_statement(
    rec: &Record,
    f: &Final,
    st: &FinalStatement,
    roles: &[SignRole],
    b: &Binding,
) -> Vec<String> {
    let mut out = Vec::new();
    if !signature_valid(&st.public_key, &f.statement, &f.signature) {
        out.push(
            "the finalisation signature does not match its statement (forged, altered or malformed)"
                .into(),
        );
    }
    if !trusted(roles, &st.role, &st.public_key) {
        out.push(format!(
            "the finalisation key {} is not trusted for role `{}`",
            fingerprint(&st.public_key),
            st.role
        ));
    }
    if st.pack_id != b.pack_id || st.manifest_sha256 != b.manifest || st.final_pdf != f.pdf {
        out.push("the finalisation statement was signed for a different pack or manifest".into());
    }
    let sigs: Vec<&str> = rec.signatures.iter().map(|e| e.signature.trim()).collect();
    if st.signatures.iter().map(|s| s.trim()).collect::<Vec<_>>() != sigs {
        out.push("the role signatures differ from those the finalisation sealed (a signature was removed, added or replaced)".into());
    }
    if st.final_pdf_sha256 != f.sha256 {
        out.push("the final PDF digest differs from the one the finalisation signed".into());
    }
    out
}

/// Every check `verify` makes on a pack: the archive's digests and listings, then (when those hold) every
/// signature, the finalisation, and the archive index's view of the sign-off. Returns the problems found.
pub fn check_pack(pack: &Path) -> Result<Vec<Finding>> {
    Ok(inspect(pack)?.0)
}

/// [`check_pack`]'s findings, and the sign-off record as read for them (`None` when it is malformed,
/// which is then one of the findings).
fn inspect(pack: &Path) -> Result<(Vec<Finding>, Option<Record>)> {
    let rec = record(pack);
    // The bag's findings come last, so they never hide what the signature checks would say.
    let bag = check_bag(pack, rec.as_ref().ok());
    let (mut out, rec) = inspect_signed(pack, rec)?;
    out.extend(bag);
    Ok((out, rec))
}

/// The archive's checks and, when they hold, the signatures', over the record as read.
fn inspect_signed(
    pack: &Path,
    rec: std::result::Result<Record, Finding>,
) -> Result<(Vec<Finding>, Option<Record>)> {
    // The sign-off files a pack may hold besides its listed ones: the record, and the final PDF only when
    // a record marks the pack final.
    let mut allowed = vec![SIGNOFF];
    if matches!(&rec, Ok(r) if r.finalised.as_ref().is_some_and(|f| f.pdf == FINAL_PDF)) {
        allowed.push(FINAL_PDF);
    }
    let mut out = crate::archive::verify(pack, &allowed)?;
    let rec = match rec {
        Ok(r) => r,
        Err(f) => {
            out.push(f);
            return Ok((out, None));
        }
    };
    if !out.is_empty() {
        return Ok((out, Some(rec)));
    }
    out.extend(check_index(pack, &rec));
    if rec.signatures.is_empty() && rec.finalised.is_none() {
        return Ok((out, Some(rec)));
    }
    let roles = roles(pack)?;
    let b = binding(pack)?;
    let (problems, valid) = check_signatures(&rec, &roles, &b);
    out.extend(problems.into_iter().map(|p| finding(SIGNOFF, p)));
    if let Some(f) = &rec.finalised {
        out.extend(check_final(pack, &rec, f, &roles, &valid, &b));
    }
    Ok((out, Some(rec)))
}

/// The archive index records each pack's signers and final PDF: a record with fewer signatures than the
/// index lists (e.g. `signoff.json` deleted) or another final PDF is reported.
fn check_index(pack: &Path, rec: &Record) -> Vec<Finding> {
    let Some(row) = crate::archive::index_row(pack) else {
        return vec![];
    };
    let mut out = Vec::new();
    let listed = row["signers"].as_array().map_or(0, Vec::len);
    if listed > rec.signatures.len() {
        out.push(finding(
            SIGNOFF,
            format!(
                "holds {} signature(s), but the archive index lists {listed}: signatures were removed",
                rec.signatures.len()
            ),
        ));
    }
    let final_sha = row["final_pdf_sha256"].as_str();
    if final_sha.is_some() && final_sha != rec.finalised.as_ref().map(|f| f.sha256.as_str()) {
        out.push(finding(
            SIGNOFF,
            "differs from the archive index's final PDF record",
        ));
    }
    out
}

/// Fails with the pack's verification problems (exit 7) when it is not intact.
/// Returns the pack's sign-off record, read once for the checks and the change.
fn require_intact(action: &'static str, pack: &Path, ignore_final_pdf: bool) -> Result<Record> {
    let (findings, rec) = inspect(pack)?;
    let problems: Vec<String> = findings
        .into_iter()
        .filter(|f| !(ignore_final_pdf && f.file == FINAL_PDF))
        .map(|f| format!("{}: {}", f.file, f.problem))
        .collect();
    match rec {
        Some(rec) if problems.is_empty() => return Ok(rec),
        _ => {}
    }
    Err(Error::NotIntact {
        action,
        pack: pack.to_path_buf(),
        problems,
    })
}

/// What `sign` did: the text to print and warnings for stderr.
pub struct Outcome {
    pub text: String,
    pub warnings: Vec<String>,
}

/// Appends a signed statement for `role` to the pack's record, after every refusal check. The caller
/// holds the pack's lock ([`crate::archive::lock_pack`]).
pub fn sign(
    pack: &Path,
    role: &str,
    key_file: &Path,
    name: Option<&str>,
    now: chrono::DateTime<chrono::Utc>,
) -> Result<Outcome> {
    let refuse = |why: String| refused("sign", pack, why);
    let mut rec = require_intact("sign", pack, false)?;
    if rec.finalised.is_some() {
        return Err(refuse(
            "the pack is final; a final pack is immutable".into(),
        ));
    }
    let roles = roles(pack)?;
    let spec = required_role(&roles, role).map_err(refuse)?;
    let loaded = read_key(key_file)?;
    let public = hex(&loaded.key.verifying_key().to_bytes());
    if !trusted(std::slice::from_ref(spec), role, &public) {
        return Err(refuse(format!(
            "key {} is not trusted for role `{role}`",
            fingerprint(&public)
        )));
    }
    if signed_roles(&rec).iter().any(|r| r == role) {
        return Err(refuse(format!(
            "role `{role}` has already signed; each role signs once"
        )));
    }
    let name = signer_name(name.unwrap_or(role)).map_err(refuse)?;
    let b = binding(pack)?;
    let st = Statement {
        pack_id: b.pack_id,
        manifest_sha256: b.manifest,
        role: role.to_string(),
        name,
        signed_at: stamp(now),
        public_key: public.clone(),
    };
    let statement = serde_json::to_string(&st).expect("statement serialises");
    let signature = hex(&loaded.key.sign(statement.as_bytes()).to_bytes());
    rec.signatures.push(Entry {
        statement,
        signature,
    });
    save(pack, &rec)?;
    rebag(pack, &rec)?;
    Ok(Outcome {
        text: signed_text(pack, &st, &roles, &rec),
        warnings: loaded.warning.into_iter().collect(),
    })
}

/// What `sign` prints: who signed with which key, and the roles still to sign (or that finalising is next).
fn signed_text(pack: &Path, st: &Statement, roles: &[SignRole], rec: &Record) -> String {
    let signed = signed_roles(rec);
    let missing: Vec<&str> = roles
        .iter()
        .filter(|r| !signed.contains(&r.role))
        .map(|r| r.role.as_str())
        .collect();
    format!(
        "signed {} as `{}` ({}, key {}); {}\n",
        pack.display(),
        st.role,
        st.name,
        fingerprint(&st.public_key),
        if missing.is_empty() {
            "every required role has signed: run `tailpack finalize` with one of their keys"
                .to_string()
        } else {
            format!("still to sign: {}", missing.join(", "))
        }
    )
}

fn stamp(now: chrono::DateTime<chrono::Utc>) -> String {
    now.format("%Y-%m-%dT%H:%M:%SZ").to_string()
}

/// Longest signer name accepted (printed on the sign-off page and listed in the archive index).
pub const NAME_MAX_CHARS: usize = 120;

/// A signer's name: one line of printable text, at most [`NAME_MAX_CHARS`] characters.
fn signer_name(name: &str) -> std::result::Result<String, String> {
    let n = name.trim();
    if n.is_empty() {
        return Err("the signer's name (--name) is empty".into());
    }
    if n.chars().any(char::is_control) {
        return Err(
            "the signer's name (--name) holds a line break or another control character; give one line of text"
                .into(),
        );
    }
    if n.chars().count() > NAME_MAX_CHARS {
        return Err(format!(
            "the signer's name (--name) is longer than {NAME_MAX_CHARS} characters"
        ));
    }
    Ok(n.to_string())
}

fn required_role<'a>(
    roles: &'a [SignRole],
    role: &str,
) -> std::result::Result<&'a SignRole, String> {
    roles.iter().find(|r| r.role == role).ok_or_else(|| {
        let names: Vec<&str> = roles.iter().map(|r| r.role.as_str()).collect();
        if names.is_empty() {
            format!("role `{role}` is not required: this pack's config lists no sign-off roles (signoff.roles)")
        } else {
            format!(
                "role `{role}` is not required by this pack's config (roles: {})",
                names.join(", ")
            )
        }
    })
}

/// What `finalize` needs before it renders: the record, the required roles, and the finalising key.
pub struct Finalising {
    pub record: Record,
    pub roles: Vec<SignRole>,
    key: SigningKey,
    role: String,
    name: String,
    pub warnings: Vec<String>,
}

/// Every refusal check of `finalize`, before anything is rendered. A `pack-final.pdf` left by an
/// interrupted earlier `finalize` (no finalised record) is ignored here and replaced.
pub fn prepare_final(
    pack: &Path,
    role: &str,
    key_file: &Path,
    name: Option<&str>,
) -> Result<Finalising> {
    let refuse = |why: String| refused("finalise", pack, why);
    let record = require_intact("finalise", pack, true)?;
    if record.finalised.is_some() {
        return Err(refuse(
            "it is already final; a final pack is immutable".into(),
        ));
    }
    let roles = roles(pack)?;
    if roles.is_empty() {
        return Err(refuse(
            "its config lists no sign-off roles (signoff.roles)".into(),
        ));
    }
    let signed = signed_roles(&record);
    let missing: Vec<&str> = roles
        .iter()
        .filter(|r| !signed.contains(&r.role))
        .map(|r| r.role.as_str())
        .collect();
    if !missing.is_empty() {
        return Err(refuse(format!(
            "role(s) not yet signed: {}",
            missing.join(", ")
        )));
    }
    required_role(&roles, role).map_err(refuse)?;
    let loaded = read_key(key_file)?;
    let public = hex(&loaded.key.verifying_key().to_bytes());
    if !trusted(&roles, role, &public) {
        return Err(refuse(format!(
            "key {} is not trusted for role `{role}`",
            fingerprint(&public)
        )));
    }
    let name = signer_name(name.unwrap_or(role)).map_err(refuse)?;
    Ok(Finalising {
        record,
        roles,
        key: loaded.key,
        role: role.to_string(),
        name,
        warnings: loaded.warning.into_iter().collect(),
    })
}

/// Signs the finalisation over the rendered final PDF's bytes and returns the finalised record.
pub fn seal_final(
    pack: &Path,
    f: Finalising,
    pdf: &[u8],
    now: chrono::DateTime<chrono::Utc>,
) -> Result<Record> {
    let b = binding(pack)?;
    let sha256 = hex(&Sha256::digest(pdf));
    let st = FinalStatement {
        pack_id: b.pack_id,
        manifest_sha256: b.manifest,
        final_pdf: FINAL_PDF.into(),
        final_pdf_sha256: sha256.clone(),
        signatures: f
            .record
            .signatures
            .iter()
            .map(|e| e.signature.trim().to_string())
            .collect(),
        role: f.role,
        name: f.name,
        finalised_at: stamp(now),
        public_key: hex(&f.key.verifying_key().to_bytes()),
    };
    let statement = serde_json::to_string(&st).expect("statement serialises");
    let signature = hex(&f.key.sign(statement.as_bytes()).to_bytes());
    let mut rec = f.record;
    rec.finalised = Some(Final {
        pdf: FINAL_PDF.into(),
        sha256,
        statement,
        signature,
    });
    Ok(rec)
}

/// A pack's sign-off for the archive index: status, signers and their times, final PDF digest and
/// finaliser, as its record says.
pub fn index_entry(pack: &Path) -> crate::archive::IndexSignoff {
    let rec = record(pack).unwrap_or_default();
    let st = statements(&rec);
    let finaliser = rec
        .finalised
        .as_ref()
        .and_then(|f| serde_json::from_str::<FinalStatement>(&f.statement).ok())
        .map(|f| (format!("{}:{}", f.role, f.name), f.finalised_at));
    crate::archive::IndexSignoff {
        status: status_of(&rec),
        signers: st
            .iter()
            .map(|s| format!("{}:{}", s.role, s.name))
            .collect(),
        final_sha: rec.finalised.map(|f| f.sha256),
        signed_at: st.into_iter().map(|s| s.signed_at).collect(),
        finalised: finaliser,
    }
}

/// `final` once finalised, `signing` once a role has signed, else `draft`.
pub fn status_of(rec: &Record) -> &'static str {
    if rec.finalised.is_some() {
        "final"
    } else if statements(rec).is_empty() {
        "draft"
    } else {
        "signing"
    }
}

/// Rewrites the pack's bag files after its sign-off record changed (a pack that is not a bag is left
/// as written).
pub fn rebag(pack: &Path, rec: &Record) -> Result<()> {
    crate::archive::bag::refresh(pack, status_of(rec), crate::archive::bag::today())
}

/// The bag's checks, and that `bag-info.txt` states the status the sign-off record gives the pack.
fn check_bag(pack: &Path, rec: Option<&Record>) -> Vec<Finding> {
    use crate::archive::bag;
    if !bag::is_bag(pack) {
        return vec![];
    }
    let id = crate::archive::recorded_id(pack).unwrap_or_default();
    let mut out = bag::check(pack, &id);
    let stated = bag::info_value(pack, bag::label::STATUS);
    if let Some(rec) = rec
        && stated.as_deref() != Some(status_of(rec))
    {
        out.push(finding(
            bag::INFO,
            format!(
                "its {} is {}, but signoff.json makes the pack {}",
                bag::label::STATUS,
                stated.as_deref().unwrap_or("missing"),
                status_of(rec)
            ),
        ));
    }
    out
}

/// Rebuilds the archive index at `root` with every pack's sign-off.
pub fn write_index(root: &Path) -> Result<()> {
    crate::archive::write_index(root, &index_entry)
}

/// Roles that have signed.
pub fn signed_roles(rec: &Record) -> Vec<String> {
    statements(rec).into_iter().map(|s| s.role).collect()
}

/// Statements of the record, parsed.
pub fn statements(rec: &Record) -> Vec<Statement> {
    rec.signatures
        .iter()
        .filter_map(|e| serde_json::from_str(&e.statement).ok())
        .collect()
}

/// Writes the record atomically (a temporary file renamed over `signoff.json`).
pub fn save(pack: &Path, rec: &Record) -> Result<()> {
    let tmp = pack.join(format!(".signoff.json.{}.tmp", std::process::id()));
    fs::write(
        &tmp,
        serde_json::to_string_pretty(rec).expect("record serialises") + "\n",
    )?;
    fs::rename(&tmp, &pack.join(SIGNOFF))
}
