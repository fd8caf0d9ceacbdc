//! Sign-off: keys, signed statements, and every refusal the issue names.

use super::common::{Fixture, Market, config};
use std::path::PathBuf;

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

#[test]
fn signatures_verify_and_refusals_are_clear() {
    let s = setup();
    let ok = sign(&s, "preparer", "preparer");
    assert_eq!(ok.code, 0, "{}", ok.stderr);
    assert!(ok.stdout.contains("still to sign: risk_reviewer"));
    assert_eq!(s.f.run(&["verify", s.pack.to_str().unwrap()]).code, 0);
    // Wrong key for the role.
    let wrong = sign(&s, "risk_reviewer", "stranger");
    assert_ne!(wrong.code, 0);
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
        ran.stderr.contains("signoff.json") && ran.stderr.contains("forged or altered"),
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
    assert_ne!(ran.code, 0);
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
    let early = s.f.run(&["finalize", p]);
    assert!(
        early.code != 0 && early.stderr.contains("not yet signed: risk_reviewer"),
        "{}",
        early.stderr
    );
    assert_eq!(sign(&s, "risk_reviewer", "reviewer").code, 0);
    let fin = s.f.run(&["finalize", p]);
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
    assert!(s.f.run(&["finalize", p]).stderr.contains("already final"));
    let pdf = s.pack.join("pack-final.pdf");
    let mut bytes = std::fs::read(&pdf).unwrap();
    bytes.push(b'\n');
    std::fs::write(&pdf, bytes).unwrap();
    let ran = s.f.run(&["verify", p]);
    assert_eq!(ran.code, 7);
    assert!(ran.stderr.contains("pack-final.pdf"), "{}", ran.stderr);
}
