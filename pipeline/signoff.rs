//! Sign-off: Ed25519 key pairs, signed statements over a pack, and their verification.
//!
//! A statement names the role, the signer, the UTC time, the pack id and the SHA-256 of the pack's
//! manifest, and is signed with Ed25519 (RFC 8032) by a key listed for that role in the pack's archived
//! config. Statements are kept verbatim (the exact signed bytes) in `signoff.json`, so anyone can check
//! them with any Ed25519 implementation. A pack that fails verification, a key not trusted for the role, and
//! a second signature for a role are refused; a finalised pack accepts no further signature.

use crate::archive::{MANIFEST, SIGNOFF};
use crate::config::SignRole;
use crate::error::{Error, Result, fs};
use crate::pack::hex;
use ed25519_dalek::{Signature, Signer, SigningKey, VerifyingKey};
use serde::{Deserialize, Serialize};
use sha2::{Digest, Sha256};
use std::path::Path;

/// The signed statement (serialised in this field order; the exact bytes are stored).
#[derive(Debug, Clone, Serialize, Deserialize, PartialEq)]
pub struct Statement {
    pub pack_id: String,
    pub manifest_sha256: String,
    pub role: String,
    pub name: String,
    pub signed_at: String,
    pub public_key: String,
}

/// One entry of the sign-off record.
#[derive(Debug, Clone, Serialize, Deserialize)]
pub struct Entry {
    /// The statement exactly as signed (compact JSON).
    pub statement: String,
    /// Ed25519 signature over the statement's bytes, hex.
    pub signature: String,
}

/// The final PDF of a finalised pack.
#[derive(Debug, Clone, Serialize, Deserialize)]
pub struct Final {
    pub pdf: String,
    pub sha256: String,
}

/// `signoff.json`.
#[derive(Debug, Clone, Serialize, Deserialize, Default)]
pub struct Record {
    pub signatures: Vec<Entry>,
    pub finalised: Option<Final>,
}

/// Short fingerprint of a public key: the first 16 hex digits of its SHA-256.
pub fn fingerprint(public_hex: &str) -> String {
    hex(&Sha256::digest(public_hex.as_bytes()))[..16].to_string()
}

fn unhex<const N: usize>(path: &Path, text: &str) -> Result<[u8; N]> {
    let t = text.trim();
    let bad = || Error::data(path, format!("is not a {}-hex-digit key", 2 * N));
    if t.len() != 2 * N {
        return Err(bad());
    }
    let mut out = [0u8; N];
    for (i, b) in out.iter_mut().enumerate() {
        *b = u8::from_str_radix(&t[2 * i..2 * i + 2], 16).map_err(|_| bad())?;
    }
    Ok(out)
}

/// Writes `<prefix>.key` (secret, hex) and `<prefix>.pub` (public, hex) from the system's random source.
pub fn keygen(prefix: &Path) -> Result<String> {
    let mut secret = [0u8; 32];
    let urandom = Path::new("/dev/urandom");
    use std::io::Read;
    std::fs::File::open(urandom)
        .and_then(|mut f| f.read_exact(&mut secret))
        .map_err(|source| Error::Io {
            action: "cannot read randomness from",
            path: urandom.into(),
            source,
        })?;
    let key = SigningKey::from_bytes(&secret);
    let public = hex(&key.verifying_key().to_bytes());
    let (kfile, pfile) = (prefix.with_extension("key"), prefix.with_extension("pub"));
    if kfile.exists() {
        return Err(Error::Run(format!(
            "{} exists; refusing to overwrite a key",
            kfile.display()
        )));
    }
    fs::write(&kfile, hex(&secret) + "\n")?;
    fs::write(&pfile, public.clone() + "\n")?;
    Ok(format!(
        "secret key {} (keep it private)\npublic key {}: {public}\nfingerprint {}\nlist the public key under signoff.roles[].keys in the fund's config\n",
        kfile.display(),
        pfile.display(),
        fingerprint(&public)
    ))
}

/// Reads a pack's sign-off record (empty when absent).
pub fn record(pack: &Path) -> Result<Record> {
    let path = pack.join(SIGNOFF);
    if !path.exists() {
        return Ok(Record::default());
    }
    serde_json::from_slice(&fs::read(&path)?)
        .map_err(|e| Error::data(&path, format!("is not a valid sign-off record: {e}")))
}

fn manifest_digest(pack: &Path) -> Result<String> {
    Ok(hex(&Sha256::digest(fs::read(&pack.join(MANIFEST))?)))
}

/// The roles required by the pack's archived config.
pub fn roles(pack: &Path) -> Result<Vec<SignRole>> {
    Ok(crate::config::load_archived(&pack.join("inputs"))?.signoff)
}

/// Checks every signature of the record; returns problems (empty when all hold).
pub fn check(pack: &Path, rec: &Record, roles: &[SignRole]) -> Result<Vec<String>> {
    let id = crate::archive::recorded_id(pack).unwrap_or_default();
    let digest = manifest_digest(pack)?;
    let mut out = Vec::new();
    for (i, e) in rec.signatures.iter().enumerate() {
        let place = format!("{SIGNOFF}: signature {}", i + 1);
        let Ok(st) = serde_json::from_str::<Statement>(&e.statement) else {
            out.push(format!("{place}: the statement is not valid"));
            continue;
        };
        if !signature_valid(pack, &st.public_key, &e.statement, &e.signature) {
            out.push(format!(
                "{place} (role {}): the signature does not match the statement (forged or altered)",
                st.role
            ));
        }
        if st.pack_id != id || st.manifest_sha256 != digest {
            out.push(format!(
                "{place} (role {}): signed a different pack or manifest than this one",
                st.role
            ));
        }
        if !roles.iter().any(|r| {
            r.role == st.role
                && r.keys
                    .iter()
                    .any(|k| k.eq_ignore_ascii_case(&st.public_key))
        }) {
            out.push(format!(
                "{place}: key {} is not trusted for role `{}`",
                fingerprint(&st.public_key),
                st.role
            ));
        }
    }
    Ok(out)
}

fn signature_valid(pack: &Path, public: &str, statement: &str, signature: &str) -> bool {
    let path = pack.join(SIGNOFF);
    let (Ok(pk), Ok(sig)) = (unhex::<32>(&path, public), unhex::<64>(&path, signature)) else {
        return false;
    };
    let Ok(vk) = VerifyingKey::from_bytes(&pk) else {
        return false;
    };
    vk.verify_strict(statement.as_bytes(), &Signature::from_bytes(&sig))
        .is_ok()
}

/// Appends a signed statement for `role` to the pack's record, after every refusal check.
pub fn sign(
    pack: &Path,
    role: &str,
    key_file: &Path,
    name: Option<&str>,
    now: chrono::DateTime<chrono::Utc>,
) -> Result<String> {
    let refuse = |why: String| Error::Run(format!("cannot sign {}: {why}", pack.display()));
    let problems = crate::archive::verify(pack)?;
    if !problems.is_empty() {
        return Err(refuse(format!(
            "the pack fails verification ({}: {})",
            problems[0].file, problems[0].problem
        )));
    }
    let mut rec = record(pack)?;
    if rec.finalised.is_some() {
        return Err(refuse(
            "the pack is final; a final pack is immutable".into(),
        ));
    }
    let roles = roles(pack)?;
    let Some(spec) = roles.iter().find(|r| r.role == role) else {
        let names: Vec<&str> = roles.iter().map(|r| r.role.as_str()).collect();
        return Err(refuse(format!(
            "role `{role}` is not required by this pack's config (roles: {})",
            names.join(", ")
        )));
    };
    let secret = unhex::<32>(key_file, &fs::read_to_string(key_file)?)?;
    let key = SigningKey::from_bytes(&secret);
    let public = hex(&key.verifying_key().to_bytes());
    if !spec.keys.iter().any(|k| k.eq_ignore_ascii_case(&public)) {
        return Err(refuse(format!(
            "key {} is not trusted for role `{role}`",
            fingerprint(&public)
        )));
    }
    if let Some(e) = rec
        .signatures
        .iter()
        .find(|e| serde_json::from_str::<Statement>(&e.statement).is_ok_and(|s| s.role == role))
    {
        let _ = e;
        return Err(refuse(format!(
            "role `{role}` has already signed; each role signs once"
        )));
    }
    let st = Statement {
        pack_id: crate::archive::recorded_id(pack).unwrap_or_default(),
        manifest_sha256: manifest_digest(pack)?,
        role: role.to_string(),
        name: name.unwrap_or(role).to_string(),
        signed_at: now.format("%Y-%m-%dT%H:%M:%SZ").to_string(),
        public_key: public.clone(),
    };
    let statement = serde_json::to_string(&st).expect("statement serialises");
    let signature = hex(&key.sign(statement.as_bytes()).to_bytes());
    rec.signatures.push(Entry {
        statement,
        signature,
    });
    save(pack, &rec)?;
    let missing: Vec<&str> = roles
        .iter()
        .filter(|r| !signed_roles(&rec).contains(&r.role))
        .map(|r| r.role.as_str())
        .collect();
    Ok(format!(
        "signed {} as `{role}` ({}, key {}); {}\n",
        pack.display(),
        st.name,
        fingerprint(&public),
        if missing.is_empty() {
            "every required role has signed: run `tailpack finalize`".to_string()
        } else {
            format!("still to sign: {}", missing.join(", "))
        }
    ))
}

/// Roles that have signed.
pub fn signed_roles(rec: &Record) -> Vec<String> {
    rec.signatures
        .iter()
        .filter_map(|e| serde_json::from_str::<Statement>(&e.statement).ok())
        .map(|s| s.role)
        .collect()
}

/// Statements of the record, parsed.
pub fn statements(rec: &Record) -> Vec<Statement> {
    rec.signatures
        .iter()
        .filter_map(|e| serde_json::from_str(&e.statement).ok())
        .collect()
}

/// Writes the record atomically.
pub fn save(pack: &Path, rec: &Record) -> Result<()> {
    let tmp = pack.join(".signoff.json.tmp");
    fs::write(
        &tmp,
        serde_json::to_string_pretty(rec).expect("record serialises") + "\n",
    )?;
    fs::rename(&tmp, &pack.join(SIGNOFF))
}
