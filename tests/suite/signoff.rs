//! Sign-off: keys, signed statements, the signed finalisation, every refusal, and the ways a reviewer
//! might try to fool `verify` (each must fail with exit 7 naming the file).

use super::common::{Fixture, Market, Ran, config};
use serde_json::Value;
use std::path::{Path, PathBuf};

struct Signed {
    f: Fixture,
    pack: PathBuf,
}

fn key(f: &Fixture, name: &str) -> String {
    let ran = f.run(&["keygen", &format!("keys/{name}")]);
    assert_eq!(ran.code, 0, "{}", ran.stderr);
    std::fs::read_to_string(f.path(&format!("keys/{name}.pub")))
        .unwrap()
        .trim()
        .to_string()
}

fn setup() -> Signed {
    let f = Fixture::new();
    std::fs::create_dir_all(f.path("keys")).unwrap();
    let (prep, risk) = (key(&f, "preparer"), key(&f, "reviewer"));
    key(&f, "stranger");
    let m = Market::new(3, "2021-01-01", "2024-06-28", 31);
    let tail = format!(
        "analysis:\n  backtest_years: 0\nsignoff:\n  roles:\n    - {{ role: preparer, title: Prepared by, keys: [\"{prep}\"] }}\n    - {{ role: risk_reviewer, title: Reviewed by, keys: [\"{risk}\"] }}\n"
    );
    f.small_fund(&m, &config(&tail));
    let ran = f.run(&["run", "fund.yaml", "--quiet"]);
    assert_eq!(ran.code, 0, "{}", ran.stderr);
    let pack = PathBuf::from(ran.stdout.lines().last().unwrap());
    Signed { f, pack }
}

fn sign(s: &Signed, role: &str, key: &str) -> super::common::Ran {
    s.f.run(&[
        "sign",
        s.pack.to_str().unwrap(),
        "--role",
        role,
        "--key",
        &format!("keys/{key}.key"),
        "--name",
        "A. Signer",
    ])
}

fn finalize(s: &Signed, role: &str, key: &str) -> Ran {
    s.f.run(&[
        "finalize",
        s.pack.to_str().unwrap(),
        "--role",
        role,
        "--key",
        &format!("keys/{key}.key"),
    ])
}

/// A pack signed by both roles and finalised.
fn finalised() -> Signed {
    let s = setup();
    assert_eq!(sign(&s, "preparer", "preparer").code, 0);
    assert_eq!(sign(&s, "risk_reviewer", "reviewer").code, 0);
    let fin = finalize(&s, "risk_reviewer", "reviewer");
    assert_eq!(fin.code, 0, "{}", fin.stderr);
    assert_eq!(verify(&s).code, 0, "{}", verify(&s).stderr);
    s
}

/// `sign` for the preparer role with the key file at `key` (relative to the fixture) and an optional name.
fn sign_as_preparer(s: &Signed, key: &str, name: Option<&str>) -> Ran {
    let mut args = vec![
        "sign",
        s.pack.to_str().unwrap(),
        "--role",
        "preparer",
        "--key",
        key,
    ];
    if let Some(n) = name {
        args.extend(["--name", n]);
    }
    s.f.run(&args)
}

fn verify(s: &Signed) -> Ran {
    s.f.run(&["verify", s.pack.to_str().unwrap()])
}

fn record(pack: &Path) -> Value {
    serde_json::from_str(&std::fs::read_to_string(pack.join("signoff.json")).unwrap()).unwrap()
}

fn write_record(pack: &Path, rec: &Value) {
    std::fs::write(pack.join("signoff.json"), rec.to_string()).unwrap();
}

fn sha256_hex(bytes: &[u8]) -> String {
    use sha2::Digest;
    sha2::Sha256::digest(bytes)
        .iter()
        .map(|b| format!("{b:02x}"))
        .collect()
}

/// `verify` fails with exit 7 and names `file`.
fn fails_naming(s: &Signed, file: &str) -> String {
    let ran = verify(s);
    assert_eq!(ran.code, 7, "verify must fail: {}", ran.stderr);
    assert!(
        ran.stderr.contains(file) && !ran.stderr.contains("panicked"),
        "must name {file}: {}",
        ran.stderr
    );
    ran.stderr
}

#[test]
fn signatures_verify_and_refusals_are_clear() {
    let s = setup();
    let ok = sign(&s, "preparer", "preparer");
    assert_eq!(ok.code, 0, "{}", ok.stderr);
    assert!(ok.stdout.contains("still to sign: risk_reviewer"));
    assert_eq!(s.f.run(&["verify", s.pack.to_str().unwrap()]).code, 0);
    // Wrong key for the role.
    let wrong = sign(&s, "risk_reviewer", "stranger");
    assert_eq!(wrong.code, 8, "a refusal has its own exit code");
    assert!(
        wrong
            .stderr
            .contains("is not trusted for role `risk_reviewer`"),
        "{}",
        wrong.stderr
    );
    // A second signature for the same role.
    let twice = sign(&s, "preparer", "preparer");
    assert!(
        twice.code != 0 && twice.stderr.contains("has already signed"),
        "{}",
        twice.stderr
    );
    // A role the config does not require.
    let unknown = sign(&s, "approver", "preparer");
    assert!(
        unknown.code != 0 && unknown.stderr.contains("role `approver` is not required"),
        "{}",
        unknown.stderr
    );
    let index = std::fs::read_to_string(s.f.path("out/index.csv")).unwrap();
    assert!(index.contains(",signing,preparer:A. Signer,"), "{index}");
}

#[test]
fn a_forged_signature_fails_verify() {
    let s = setup();
    assert_eq!(sign(&s, "preparer", "preparer").code, 0);
    let path = s.pack.join("signoff.json");
    let mut rec: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(&path).unwrap()).unwrap();
    // Change the signer's name inside the signed statement: the signature no longer matches.
    let st = rec["signatures"][0]["statement"]
        .as_str()
        .unwrap()
        .replace("A. Signer", "B. Other");
    rec["signatures"][0]["statement"] = st.into();
    std::fs::write(&path, rec.to_string()).unwrap();
    let ran = s.f.run(&["verify", s.pack.to_str().unwrap()]);
    assert_eq!(ran.code, 7);
    assert!(
        ran.stderr.contains("signoff.json") && ran.stderr.contains("forged, altered"),
        "{}",
        ran.stderr
    );
}

#[test]
fn a_signature_over_another_pack_fails_verify() {
    let s = setup();
    assert_eq!(sign(&s, "preparer", "preparer").code, 0);
    // A second revision (changed holdings) with the first revision's sign-off record copied into it.
    s.f.write(
        "data/holdings.csv",
        "asset,weight\nAS01,0.5\nAS02,0.25\nAS03,0.25\n",
    );
    let ran = s.f.run(&["run", "fund.yaml", "--quiet"]);
    let r2 = PathBuf::from(ran.stdout.lines().last().unwrap());
    std::fs::copy(s.pack.join("signoff.json"), r2.join("signoff.json")).unwrap();
    let ran = s.f.run(&["verify", r2.to_str().unwrap()]);
    assert_eq!(ran.code, 7);
    assert!(
        ran.stderr.contains("signed a different pack or manifest"),
        "{}",
        ran.stderr
    );
}

#[test]
fn signing_after_an_input_copy_changed_is_refused() {
    let s = setup();
    let copy = s.pack.join("inputs/holdings.csv");
    let mut text = std::fs::read_to_string(&copy).unwrap();
    text.push_str("\n");
    std::fs::write(&copy, text).unwrap();
    let ran = sign(&s, "preparer", "preparer");
    assert_eq!(
        ran.code, 7,
        "signing a pack that fails verify exits as verify does"
    );
    assert!(
        ran.stderr.contains("fails verification") && ran.stderr.contains("inputs/holdings.csv"),
        "{}",
        ran.stderr
    );
}

#[test]
fn finalize_needs_every_role_then_the_pack_is_immutable() {
    let s = setup();
    let p = s.pack.to_str().unwrap();
    assert_eq!(sign(&s, "preparer", "preparer").code, 0);
    let early = finalize(&s, "risk_reviewer", "reviewer");
    assert!(
        early.code != 0 && early.stderr.contains("not yet signed: risk_reviewer"),
        "{}",
        early.stderr
    );
    assert_eq!(sign(&s, "risk_reviewer", "reviewer").code, 0);
    let fin = finalize(&s, "risk_reviewer", "reviewer");
    assert_eq!(fin.code, 0, "{}", fin.stderr);
    // The final PDF, read back by poppler's pdftotext, says FINAL and names the signers with fingerprints.
    let text = super::common::pdf_text(&s.pack.join("pack-final.pdf"));
    assert!(
        text.contains("FINAL") && text.contains("A. Signer") && text.contains("Reviewed by"),
        "{text}"
    );
    let pubkey = std::fs::read_to_string(s.f.path("keys/reviewer.pub")).unwrap();
    assert!(text.contains(&tailpack::signoff::fingerprint(pubkey.trim())));
    assert_eq!(s.f.run(&["verify", p]).code, 0);
    let index = std::fs::read_to_string(s.f.path("out/index.csv")).unwrap();
    assert!(index.contains(",final,"), "{index}");
    // Immutable: no further signature, no second finalize; a changed final PDF fails verify.
    assert!(
        sign(&s, "preparer", "preparer")
            .stderr
            .contains("final pack is immutable")
    );
    let again = finalize(&s, "preparer", "preparer");
    assert!(
        again.code == 8 && again.stderr.contains("already final"),
        "{}",
        again.stderr
    );
    let pdf = s.pack.join("pack-final.pdf");
    let mut bytes = std::fs::read(&pdf).unwrap();
    bytes.push(b'\n');
    std::fs::write(&pdf, bytes).unwrap();
    let ran = s.f.run(&["verify", p]);
    assert_eq!(ran.code, 7);
    assert!(ran.stderr.contains("pack-final.pdf"), "{}", ran.stderr);
}

#[test]
fn a_replaced_final_pdf_fails_verify_even_with_its_digest_edited() {
    let s = finalised();
    let pdf = s.pack.join("pack-final.pdf");
    // Variant 1: the draft PDF put in place of the final one, its digest written into signoff.json.
    let draft = std::fs::read(s.pack.join("pack.pdf")).unwrap();
    std::fs::write(&pdf, &draft).unwrap();
    let mut rec = record(&s.pack);
    rec["finalised"]["sha256"] = sha256_hex(&draft).into();
    write_record(&s.pack, &rec);
    fails_naming(&s, "pack-final.pdf");
    // Variant 2: also the digest inside the signed finalisation statement edited: its signature breaks.
    let st = rec["finalised"]["statement"].as_str().unwrap().to_string();
    let signed: Value = serde_json::from_str(&st).unwrap();
    let old = signed["final_pdf_sha256"].as_str().unwrap().to_string();
    rec["finalised"]["statement"] = st.replace(&old, &sha256_hex(&draft)).into();
    write_record(&s.pack, &rec);
    let err = fails_naming(&s, "signoff.json");
    assert!(err.contains("finalisation signature"), "{err}");
    // Variant 3: one byte appended to the final PDF, record untouched.
    let s = finalised();
    let pdf = s.pack.join("pack-final.pdf");
    let mut bytes = std::fs::read(&pdf).unwrap();
    bytes.push(b' ');
    std::fs::write(&pdf, bytes).unwrap();
    fails_naming(&s, "pack-final.pdf");
    // Variant 4: the final PDF deleted.
    std::fs::remove_file(&pdf).unwrap();
    fails_naming(&s, "pack-final.pdf");
}

#[test]
fn a_finalised_record_without_signatures_fails_verify() {
    let s = finalised();
    let mut rec = record(&s.pack);
    // Variant 1: every role signature deleted, the finalisation kept.
    rec["signatures"] = Value::Array(vec![]);
    write_record(&s.pack, &rec);
    let err = fails_naming(&s, "signoff.json");
    assert!(err.contains("without a valid signature"), "{err}");
    // Variant 2: a hand-written finalised record (no finalisation statement) in an unsigned pack, with the
    // final PDF's true digest.
    let s = setup();
    let pdf = std::fs::read(s.pack.join("pack.pdf")).unwrap();
    std::fs::write(s.pack.join("pack-final.pdf"), &pdf).unwrap();
    let forged = serde_json::json!({"signatures": [], "finalised": {"pdf": "pack-final.pdf", "sha256": sha256_hex(&pdf)}});
    write_record(&s.pack, &forged);
    fails_naming(&s, "signoff.json");
    // Variant 3: a real finalisation copied from another final pack: signed for another pack.
    let other = finalised();
    let s = setup();
    assert_eq!(sign(&s, "preparer", "preparer").code, 0);
    assert_eq!(sign(&s, "risk_reviewer", "reviewer").code, 0);
    let mut rec = record(&s.pack);
    rec["finalised"] = record(&other.pack)["finalised"].clone();
    write_record(&s.pack, &rec);
    std::fs::copy(
        other.pack.join("pack-final.pdf"),
        s.pack.join("pack-final.pdf"),
    )
    .unwrap();
    fails_naming(&s, "signoff.json");
}

#[test]
fn a_final_pack_with_a_signature_removed_or_replaced_fails_verify() {
    for variant in ["first", "last", "duplicated", "swapped"] {
        let s = finalised();
        let mut rec = record(&s.pack);
        let sigs = rec["signatures"].as_array_mut().unwrap();
        match variant {
            "first" => {
                sigs.remove(0);
            }
            "last" => {
                sigs.pop();
            }
            "duplicated" => {
                let again = sigs[0].clone();
                sigs.push(again);
            }
            _ => sigs.swap(0, 1),
        }
        write_record(&s.pack, &rec);
        let err = fails_naming(&s, "signoff.json");
        assert!(
            err.contains("signature"),
            "variant {variant} must say what is wrong: {err}"
        );
    }
}

#[test]
fn a_planted_final_pdf_fails_verify() {
    // Variant 1: in an unsigned pack (no signoff.json at all).
    let s = setup();
    std::fs::copy(s.pack.join("pack.pdf"), s.pack.join("pack-final.pdf")).unwrap();
    let err = fails_naming(&s, "pack-final.pdf");
    assert!(err.contains("not listed"), "{err}");
    // Variant 2: in a pack signed by one role, not final.
    let s = setup();
    assert_eq!(sign(&s, "preparer", "preparer").code, 0);
    std::fs::copy(s.pack.join("pack.pdf"), s.pack.join("pack-final.pdf")).unwrap();
    fails_naming(&s, "pack-final.pdf");
    // Variant 3: fully signed, then a finalisation made with a key no role trusts (a forger's own key).
    let s = setup();
    assert_eq!(sign(&s, "preparer", "preparer").code, 0);
    assert_eq!(sign(&s, "risk_reviewer", "reviewer").code, 0);
    let ran = finalize(&s, "risk_reviewer", "stranger");
    assert_eq!(ran.code, 8, "{}", ran.stderr);
    assert!(ran.stderr.contains("not trusted"), "{}", ran.stderr);
    assert!(!s.pack.join("pack-final.pdf").exists());
    assert_eq!(
        verify(&s).code,
        0,
        "a refused finalize leaves the pack intact"
    );
}

#[test]
fn deleting_the_sign_off_record_of_an_archived_pack_fails_verify() {
    let s = setup();
    assert_eq!(sign(&s, "preparer", "preparer").code, 0);
    std::fs::remove_file(s.pack.join("signoff.json")).unwrap();
    let err = fails_naming(&s, "signoff.json");
    assert!(err.contains("archive index lists 1"), "{err}");
}

#[test]
fn concurrent_signers_never_lose_a_statement() {
    // Two roles sign at the same moment, several times over: both exit 0 and both statements are kept.
    for _ in 0..3 {
        let s = setup();
        let spawn = |role: &str, key: &str| {
            std::process::Command::new(env!("CARGO_BIN_EXE_tailpack"))
                .args([
                    "sign",
                    s.pack.to_str().unwrap(),
                    "--role",
                    role,
                    "--key",
                    &format!("keys/{key}.key"),
                ])
                .current_dir(s.f.dir.path())
                .output()
                .unwrap()
        };
        let (a, b) = std::thread::scope(|sc| {
            let a = sc.spawn(|| spawn("preparer", "preparer"));
            let b = sc.spawn(|| spawn("risk_reviewer", "reviewer"));
            (a.join().unwrap(), b.join().unwrap())
        });
        assert!(a.status.success() && b.status.success());
        let rec = record(&s.pack);
        assert_eq!(rec["signatures"].as_array().unwrap().len(), 2, "{rec}");
        assert_eq!(verify(&s).code, 0, "{}", verify(&s).stderr);
        let index = std::fs::read_to_string(s.f.path("out/index.json")).unwrap();
        assert!(
            index.contains("\"signing\"") && index.contains("risk_reviewer:"),
            "{index}"
        );
    }
}

#[cfg(unix)]
fn mode(p: &Path) -> u32 {
    use std::os::unix::fs::PermissionsExt;
    std::fs::metadata(p).unwrap().permissions().mode() & 0o777
}

#[cfg(unix)]
#[test]
fn keygen_keeps_the_secret_private_and_never_overwrites() {
    let f = Fixture::new();
    std::fs::create_dir_all(f.path("keys")).unwrap();
    let ran = f.run(&["keygen", "keys/a"]);
    assert_eq!(ran.code, 0, "{}", ran.stderr);
    assert_eq!(
        mode(&f.path("keys/a.key")),
        0o600,
        "secret key is owner-only"
    );
    // Either file of the pair existing refuses, and neither file is touched.
    let public = std::fs::read(f.path("keys/a.pub")).unwrap();
    for (gone, kept) in [("keys/a.pub", "keys/a.key"), ("keys/a.key", "keys/a.pub")] {
        let saved = std::fs::read(f.path(gone)).unwrap();
        std::fs::remove_file(f.path(gone)).unwrap();
        let kept_bytes = std::fs::read(f.path(kept)).unwrap();
        let again = f.run(&["keygen", "keys/a"]);
        assert_eq!(again.code, 8, "{}", again.stderr);
        assert!(
            again.stderr.contains("never overwritten"),
            "{}",
            again.stderr
        );
        assert_eq!(std::fs::read(f.path(kept)).unwrap(), kept_bytes);
        assert!(
            !f.path(gone).exists(),
            "the missing file is not made either"
        );
        std::fs::write(f.path(gone), saved).unwrap();
    }
    assert_eq!(std::fs::read(f.path("keys/a.pub")).unwrap(), public);
    // A key file name that exists as a folder, and a prefix with a dot, are handled.
    std::fs::create_dir_all(f.path("keys/b.key")).unwrap();
    assert_eq!(f.run(&["keygen", "keys/b"]).code, 8);
    assert_eq!(f.run(&["keygen", "keys/c.v2"]).code, 0);
    assert!(f.path("keys/c.v2.key").exists() && f.path("keys/c.v2.pub").exists());
}

#[cfg(unix)]
#[test]
fn sign_warns_when_a_key_file_is_readable_by_others() {
    use std::os::unix::fs::PermissionsExt;
    let s = setup();
    let key = s.f.path("keys/preparer.key");
    std::fs::set_permissions(&key, std::fs::Permissions::from_mode(0o644)).unwrap();
    let ran = sign(&s, "preparer", "preparer");
    assert_eq!(ran.code, 0, "{}", ran.stderr);
    assert!(
        ran.stderr.contains("warning")
            && ran.stderr.contains("preparer.key")
            && ran.stderr.contains("chmod 600"),
        "{}",
        ran.stderr
    );
    let quiet = sign(&s, "risk_reviewer", "reviewer");
    assert_eq!(quiet.code, 0);
    assert!(!quiet.stderr.contains("warning"), "{}", quiet.stderr);
}

#[test]
fn malformed_key_files_are_refused_naming_the_file() {
    let s = setup();
    let valid = std::fs::read_to_string(s.f.path("keys/preparer.key")).unwrap();
    let cases: Vec<(&str, Vec<u8>)> = vec![
        // 64 bytes long, but a two-byte character straddles a digit pair.
        ("nonascii", format!("é{}", &valid.trim()[2..]).into_bytes()),
        (
            "nonascii_len",
            format!("{}é", &valid.trim()[..63]).into_bytes(),
        ),
        ("short", valid.trim()[..40].as_bytes().to_vec()),
        ("not_hex", "zz".repeat(32).into_bytes()),
        ("empty", vec![]),
        ("binary", vec![0xff; 64]),
        ("huge", vec![b'a'; 5 << 20]),
        (
            "public_key",
            std::fs::read(s.f.path("keys/preparer.pub")).unwrap()[..10].to_vec(),
        ),
    ];
    for (name, bytes) in cases {
        let path = format!("keys/{name}.key");
        std::fs::write(s.f.path(&path), bytes).unwrap();
        let ran = sign_as_preparer(&s, &path, None);
        assert_eq!(ran.code, 8, "{name}: {}", ran.stderr);
        assert!(
            ran.stderr.contains(&path) && !ran.stderr.contains("panicked"),
            "{name}: {}",
            ran.stderr
        );
    }
    // Not regular files: refused without reading (a FIFO would block, /dev/zero never ends).
    std::fs::create_dir_all(s.f.path("keys/folder.key")).unwrap();
    let mut specials = vec![
        ("keys/folder.key".to_string(), "a folder"),
        ("/dev/zero".to_string(), "a device"),
    ];
    #[cfg(unix)]
    {
        let fifo = s.f.path("keys/pipe.key");
        assert!(
            std::process::Command::new("mkfifo")
                .arg(&fifo)
                .status()
                .unwrap()
                .success()
        );
        specials.push((fifo.to_str().unwrap().to_string(), "FIFO"));
    }
    for (path, what) in specials {
        let ran = sign_as_preparer(&s, &path, None);
        assert_eq!(ran.code, 8, "{path}: {}", ran.stderr);
        assert!(
            ran.stderr.contains(&path) && ran.stderr.contains(what),
            "{}",
            ran.stderr
        );
    }
    // A key file that is not there is a refusal like a malformed one (exit 8), not an I/O failure.
    let ran = sign_as_preparer(&s, "keys/missing.key", None);
    assert_eq!(ran.code, 8, "{}", ran.stderr);
    assert!(
        ran.stderr.contains("keys/missing.key") && ran.stderr.contains("does not exist"),
        "{}",
        ran.stderr
    );
    assert!(!s.pack.join("signoff.json").exists(), "nothing was signed");
}

#[test]
fn malformed_signatures_fail_verify_naming_the_record() {
    let tamper: Vec<(&str, fn(&mut Value))> = vec![
        ("signature with a two-byte character", |r| {
            let sig = r["signatures"][0]["signature"]
                .as_str()
                .unwrap()
                .to_string();
            r["signatures"][0]["signature"] = format!("é{}", &sig[2..]).into();
        }),
        ("short signature", |r| {
            r["signatures"][0]["signature"] = "abcd".into()
        }),
        ("public key with a non-ASCII character", |r| {
            let st = r["signatures"][0]["statement"]
                .as_str()
                .unwrap()
                .to_string();
            let v: Value = serde_json::from_str(&st).unwrap();
            let pk = v["public_key"].as_str().unwrap().to_string();
            r["signatures"][0]["statement"] = st.replace(&pk, &format!("ü{}", &pk[2..])).into();
        }),
        ("statement not JSON", |r| {
            r["signatures"][0]["statement"] = "{".into()
        }),
        ("unknown field", |r| r["extra"] = "x".into()),
        ("record not an object", |r| *r = Value::String("x".into())),
    ];
    for (what, f) in tamper {
        let s = setup();
        assert_eq!(sign(&s, "preparer", "preparer").code, 0);
        let mut rec = record(&s.pack);
        f(&mut rec);
        write_record(&s.pack, &rec);
        let ran = verify(&s);
        assert_eq!(ran.code, 7, "{what}: {}", ran.stderr);
        assert!(
            ran.stderr.contains("signoff.json") && !ran.stderr.contains("panicked"),
            "{what}: {}",
            ran.stderr
        );
        // Signing such a pack is refused the same way, without a panic.
        let again = sign(&s, "risk_reviewer", "reviewer");
        assert_eq!(again.code, 7, "{what}: {}", again.stderr);
    }
    // A record that is not valid UTF-8 or JSON at all.
    let s = setup();
    std::fs::write(s.pack.join("signoff.json"), [0xff, 0xfe, 0x00]).unwrap();
    fails_naming(&s, "signoff.json");
}

#[test]
fn a_signer_name_cannot_break_a_line() {
    let s = setup();
    for name in ["Ann, Lee\n1,2,3,final", "tab\tname", "", "   "] {
        let ran = sign_as_preparer(&s, "keys/preparer.key", Some(name));
        assert_eq!(ran.code, 8, "{name:?}: {}", ran.stderr);
        assert!(ran.stderr.contains("--name"), "{}", ran.stderr);
    }
    let long = "x".repeat(500);
    let ran = sign_as_preparer(&s, "keys/preparer.key", Some(&long));
    assert_eq!(ran.code, 8, "{}", ran.stderr);
    assert!(
        ran.stderr.len() < 1500,
        "the message does not repeat the long name"
    );
}
