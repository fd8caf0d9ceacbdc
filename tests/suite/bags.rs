//! Packs as BagIt bags (RFC 8493), checked by an outside validator (Python's `bagit`, the Library of
//! Congress's reference implementation on PyPI); packs written before packs were bags; the sweep of a
//! whole archive root; and the archive's `index.html` as a real browser (Debian's headless Chromium) reads
//! it. The outside tools are skipped, with the reason printed, only where they are not installed;
//! `.ci/run` installs both.

use super::common::{Fixture, Market, Ran, config, copy_dir, json, repo};
use std::path::{Path, PathBuf};
use std::process::Command;

fn last_line(ran: &Ran) -> PathBuf {
    PathBuf::from(ran.stdout.lines().last().expect("output"))
}

/// Whether Python's `bagit` can be imported; prints why a check is skipped when not.
fn python_bagit() -> bool {
    let ok = Command::new("python3")
        .args(["-c", "import bagit"])
        .output()
        .is_ok_and(|o| o.status.success());
    if !ok {
        println!(
            "skipped the outside BagIt check: python3 with the `bagit` package is not installed here (pip install bagit; .ci/run installs it)"
        );
    }
    ok
}

/// Python `bagit`'s full validation of the bag at `pack` (every manifest's digests, the payload's
/// completeness and Payload-Oxum): whether it holds, and what it said.
fn bagit_validates(pack: &Path) -> (bool, String) {
    let script = "import bagit, sys\ntry:\n    bagit.Bag(sys.argv[1]).validate()\n    print('valid')\nexcept bagit.BagError as e:\n    print('invalid:', e)\n    sys.exit(1)\n";
    let out = Command::new("python3")
        .args(["-c", script, pack.to_str().unwrap()])
        .output()
        .expect("python3 runs");
    let said =
        String::from_utf8_lossy(&out.stdout).into_owned() + &String::from_utf8_lossy(&out.stderr);
    (out.status.success(), said)
}

fn verify(f: &Fixture, path: &Path) -> Ran {
    f.run(&["verify", path.to_str().unwrap()])
}

/// The demo fund's pack in a fixture folder.
fn demo_pack(f: &Fixture) -> PathBuf {
    copy_dir(&repo().join("config-demo"), f.dir.path());
    let ran = f.run(&["run", "fund.yaml", "--quiet", "--out", "out"]);
    assert_eq!(ran.code, 0, "{}", ran.stderr);
    last_line(&ran)
}

#[test]
fn the_demo_pack_is_a_valid_bag_and_tampering_fails_both_validators() {
    let f = Fixture::new();
    let pack = demo_pack(&f);
    // bag-info.txt names the pack: its External-Identifier is the pack id, which coreutils recomputes
    // from the listing (README: the pack id is the SHA-256 of inputs.sha256).
    let sum = Command::new("sha256sum")
        .arg("inputs.sha256")
        .current_dir(&pack)
        .output()
        .unwrap();
    let id = String::from_utf8_lossy(&sum.stdout)
        .split_whitespace()
        .next()
        .unwrap()
        .to_string();
    let info = std::fs::read_to_string(pack.join("bag-info.txt")).unwrap();
    assert!(
        info.contains(&format!("External-Identifier: {id}\n"))
            && info.contains("Sign-Off-Status: draft\n")
            && info.contains("As-Of-Date: ")
            && info.contains("Fund-Name: "),
        "{info}"
    );
    if !python_bagit() {
        return;
    }
    let (valid, said) = bagit_validates(&pack);
    assert!(valid, "python bagit must accept the demo pack: {said}");

    // One byte of a pack file changed: both fail.
    let results = pack.join("results.json");
    let original = std::fs::read(&results).unwrap();
    let mut changed = original.clone();
    let at = changed.len() / 2;
    changed[at] ^= 0x01;
    std::fs::write(&results, &changed).unwrap();
    let (valid, said) = bagit_validates(&pack);
    assert!(!valid && said.contains("results.json"), "{said}");
    let ran = verify(&f, &pack);
    assert_eq!(ran.code, 7, "{}", ran.stderr);
    assert!(ran.stderr.contains("results.json"), "{}", ran.stderr);
    std::fs::write(&results, &original).unwrap();
    assert_eq!(verify(&f, &pack).code, 0, "restored");

    // A file added to the payload folder: both fail.
    let planted = pack.join("data/extra.csv");
    std::fs::write(&planted, "asset,weight\nAS01,1\n").unwrap();
    let (valid, said) = bagit_validates(&pack);
    assert!(
        !valid,
        "python bagit must refuse an added payload file: {said}"
    );
    let ran = verify(&f, &pack);
    assert_eq!(ran.code, 7, "{}", ran.stderr);
    assert!(ran.stderr.contains("data/extra.csv"), "{}", ran.stderr);
    std::fs::remove_file(&planted).unwrap();

    // A file added beside the pack's own: RFC 8493 lets tag files go unlisted, so a BagIt validator
    // may accept it; tailpack does not.
    std::fs::write(pack.join("notes.txt"), "added later\n").unwrap();
    let ran = verify(&f, &pack);
    assert_eq!(ran.code, 7, "{}", ran.stderr);
    assert!(ran.stderr.contains("notes.txt"), "{}", ran.stderr);
}

/// A small fund whose config requires one role (the preparer, key `keys/p`).
fn signed_fund() -> (Fixture, PathBuf) {
    let f = Fixture::new();
    std::fs::create_dir_all(f.path("keys")).unwrap();
    assert_eq!(f.run(&["keygen", "keys/p"]).code, 0);
    let public = std::fs::read_to_string(f.path("keys/p.pub")).unwrap();
    let m = Market::new(3, "2021-01-01", "2024-06-28", 41);
    let tail = format!(
        "analysis:\n  backtest_years: 0\nsignoff:\n  roles:\n    - {{ role: preparer, keys: [\"{}\"] }}\n",
        public.trim()
    );
    f.small_fund(&m, &config(&tail));
    let ran = f.run(&["run", "fund.yaml", "--quiet"]);
    assert_eq!(ran.code, 0, "{}", ran.stderr);
    let pack = last_line(&ran);
    (f, pack)
}

#[test]
fn a_bag_stays_valid_through_sign_and_finalize() {
    let (f, pack) = signed_fund();
    let key = ["--role", "preparer", "--key", "keys/p.key"];
    let p = pack.to_str().unwrap();
    let ran = f.run(&[&["sign", p][..], &key[..]].concat());
    assert_eq!(ran.code, 0, "{}", ran.stderr);
    let info = std::fs::read_to_string(pack.join("bag-info.txt")).unwrap();
    assert!(info.contains("Sign-Off-Status: signing\n"), "{info}");
    let ran = f.run(&[&["finalize", p][..], &key[..]].concat());
    assert_eq!(ran.code, 0, "{}", ran.stderr);
    let info = std::fs::read_to_string(pack.join("bag-info.txt")).unwrap();
    assert!(info.contains("Sign-Off-Status: final\n"), "{info}");
    let tags = std::fs::read_to_string(pack.join("tagmanifest-sha256.txt")).unwrap();
    assert!(
        tags.contains("  signoff.json\n") && tags.contains("  pack-final.pdf\n"),
        "{tags}"
    );
    assert_eq!(verify(&f, &pack).code, 0, "{}", verify(&f, &pack).stderr);
    if python_bagit() {
        let (valid, said) = bagit_validates(&pack);
        assert!(valid, "a final pack is still a valid bag: {said}");
    }
    // The status in bag-info.txt is held to the sign-off record: claiming another fails verify.
    let edited = info.replace("Sign-Off-Status: final", "Sign-Off-Status: draft");
    std::fs::write(pack.join("bag-info.txt"), edited).unwrap();
    let ran = verify(&f, &pack);
    assert_eq!(ran.code, 7);
    assert!(ran.stderr.contains("bag-info.txt"), "{}", ran.stderr);
}

/// The bag's own files: removing them gives a pack of the layout written before packs were bags.
const BAG_FILES: [&str; 4] = [
    "bagit.txt",
    "bag-info.txt",
    "manifest-sha256.txt",
    "tagmanifest-sha256.txt",
];

#[test]
fn packs_written_before_packs_were_bags_still_verify_sign_and_rerun() {
    // A pack and its archive written by tailpack before packs were bags (tests/fixtures/old-layout,
    // README there): verify, the sweep and sign keep working, and sign leaves it as it was laid out.
    let f = Fixture::new();
    copy_dir(&repo().join("tests/fixtures/old-layout"), f.dir.path());
    let pack = f.path("archive/old-layout-fund-fictional/2024-06-28/r1");
    assert!(!pack.join("bagit.txt").exists());
    let ran = verify(&f, &pack);
    assert_eq!(ran.code, 0, "{}", ran.stderr);
    assert!(ran.stdout.contains("1 signature(s) hold"), "{}", ran.stdout);
    let ran = f.run(&["verify", "archive", "--quiet"]);
    assert_eq!(ran.code, 0, "{}{}", ran.stdout, ran.stderr);
    assert!(
        ran.stdout.contains("note: index.html is missing"),
        "{}",
        ran.stdout
    );
    let ran = f.run(&[
        "sign",
        pack.to_str().unwrap(),
        "--role",
        "risk_reviewer",
        "--key",
        "keys/reviewer.key",
    ]);
    assert_eq!(ran.code, 0, "{}", ran.stderr);
    assert!(BAG_FILES.iter().all(|b| !pack.join(b).exists()));
    assert_eq!(verify(&f, &pack).code, 0, "{}", verify(&f, &pack).stderr);
    assert!(
        f.path("archive/index.html").is_file(),
        "sign rebuilds the index page"
    );

    // A pack of that layout made now (the bag's files removed) re-runs byte for byte.
    let (g, fresh) = signed_fund();
    for b in BAG_FILES {
        std::fs::remove_file(fresh.join(b)).unwrap();
    }
    std::fs::remove_dir(fresh.join("data")).unwrap();
    let ran = g.run(&["verify", fresh.to_str().unwrap(), "--rerun"]);
    assert_eq!(ran.code, 0, "{}", ran.stderr);
    assert!(ran.stdout.contains("identical outputs"), "{}", ran.stdout);
    // Half a bag is not an old pack: a lone bag-info.txt is a file no listing accounts for.
    std::fs::write(fresh.join("bag-info.txt"), "Sign-Off-Status: final\n").unwrap();
    let ran = verify(&g, &fresh);
    assert_eq!(ran.code, 7);
    assert!(ran.stderr.contains("bag-info.txt"), "{}", ran.stderr);
}

/// Two funds (one named with markup characters) with packs for two month-ends, in one archive `out`.
fn two_funds_two_months() -> Fixture {
    let f = Fixture::new();
    let m = Market::new(3, "2021-01-01", "2024-06-28", 43);
    f.small_fund(&m, &config("analysis:\n  backtest_years: 0\n"));
    let second = config("analysis:\n  backtest_years: 0\n").replace(
        "name: Test Fund (fictional)",
        "name: \"Second <b>Fund</b> & Co (fictional)\"\n  short_name: second-fund",
    );
    f.write("second.yaml", &second);
    for cfg in ["fund.yaml", "second.yaml"] {
        for as_of in ["2024-05-31", "2024-06-28"] {
            let ran = f.run(&["run", cfg, "--quiet", "--as-of", as_of]);
            assert_eq!(ran.code, 0, "{cfg} {as_of}: {}", ran.stderr);
        }
    }
    f
}

#[test]
fn the_sweep_names_the_one_tampered_pack_and_exits_7() {
    let f = two_funds_two_months();
    let ran = f.run(&["verify", "out", "--report", "sweep.json"]);
    assert_eq!(ran.code, 0, "{}{}", ran.stdout, ran.stderr);
    let report = json(&f.path("sweep.json"));
    let s = &report["summary"];
    assert_eq!(
        (
            s["packs_checked"].as_u64(),
            s["intact"].as_u64(),
            s["failed"].as_u64()
        ),
        (Some(4), Some(4), Some(0)),
        "{report}"
    );
    assert_eq!(
        (s["unsigned"].as_u64(), s["final"].as_u64()),
        (Some(4), Some(0))
    );
    assert_eq!(s["index_intact"], true);

    let tampered = "second-fund/2024-05-31/r1";
    let weights = f.path(&format!("out/{tampered}/weights.csv"));
    let original = std::fs::read(&weights).unwrap();
    let mut bytes = original.clone();
    let last = bytes.len() - 2;
    bytes[last] = if bytes[last] == b'1' { b'2' } else { b'1' };
    std::fs::write(&weights, bytes).unwrap();
    let ran = f.run(&["verify", "out", "--report", "sweep.json"]);
    assert_eq!(ran.code, 7, "{}{}", ran.stdout, ran.stderr);
    let report = json(&f.path("sweep.json"));
    let failed: Vec<&str> = report["packs"]
        .as_array()
        .unwrap()
        .iter()
        .filter(|p| p["intact"] == false)
        .map(|p| p["path"].as_str().unwrap())
        .collect();
    assert_eq!(failed, [tampered], "{report}");
    assert_eq!(report["summary"]["intact"].as_u64(), Some(3));
    let line = ran
        .stdout
        .lines()
        .find(|l| l.starts_with(tampered))
        .unwrap_or_default();
    assert!(line.ends_with("FAILED"), "{}", ran.stdout);
    assert!(
        ran.stdout.contains("weights.csv: was changed"),
        "{}",
        ran.stdout
    );

    // An index row removed: the index fails, though every pack holds.
    std::fs::write(&weights, original).unwrap();
    assert_eq!(f.run(&["verify", "out"]).code, 0);
    let mut rows: Vec<serde_json::Value> =
        serde_json::from_slice(&std::fs::read(f.path("out/index.json")).unwrap()).unwrap();
    rows.pop();
    std::fs::write(
        f.path("out/index.json"),
        serde_json::to_string_pretty(&rows).unwrap(),
    )
    .unwrap();
    let ran = f.run(&["verify", "out", "--report", "sweep.json"]);
    assert_eq!(ran.code, 7, "{}", ran.stdout);
    assert!(
        ran.stdout.contains("index FAILED: index.json"),
        "{}",
        ran.stdout
    );
    let report = json(&f.path("sweep.json"));
    assert_eq!(report["summary"]["intact"].as_u64(), Some(4));
    assert_eq!(report["summary"]["index_intact"], false);
}

/// Runs headless Chromium on `page` and returns the DOM after load; `None` (with the reason printed)
/// where it is not installed.
fn chromium_dom(page: &Path, profile: &Path) -> Option<String> {
    let browser = Path::new("/usr/bin/chromium");
    if !browser.exists() {
        println!(
            "skipped the browser check: /usr/bin/chromium is not installed here (apt-get install chromium; .ci/run installs it)"
        );
        return None;
    }
    let url = format!("file://{}", page.display());
    let mut child = Command::new(browser)
        .args([
            "--headless",
            "--no-sandbox",
            "--disable-gpu",
            "--disable-quic",
            "--no-first-run",
            "--disable-background-networking",
            "--disable-component-update",
            "--disable-sync",
            &format!("--user-data-dir={}", profile.display()),
            "--dump-dom",
            &url,
        ])
        .stdout(std::process::Stdio::piped())
        .stderr(std::process::Stdio::null())
        .spawn()
        .expect("chromium starts");
    let mut out = String::new();
    use std::io::Read;
    let mut stdout = child.stdout.take().unwrap();
    let reader = std::thread::spawn(move || {
        let _ = stdout.read_to_string(&mut out);
        out
    });
    let start = std::time::Instant::now();
    while child.try_wait().unwrap().is_none() {
        if start.elapsed() > std::time::Duration::from_secs(120) {
            let _ = child.kill();
            panic!("chromium did not finish loading {url} within 120 s");
        }
        std::thread::sleep(std::time::Duration::from_millis(50));
    }
    Some(reader.join().unwrap())
}

/// Every `href="…"` of a DOM, unescaped and percent-decoded.
fn links(dom: &str) -> Vec<String> {
    dom.split("href=\"")
        .skip(1)
        .filter_map(|s| s.split('"').next())
        .map(|h| percent_decoded(&h.replace("&amp;", "&")))
        .collect()
}

/// RFC 3986 §2.1 percent-decoding.
fn percent_decoded(text: &str) -> String {
    let b = text.as_bytes();
    let mut out = Vec::new();
    let mut i = 0;
    while i < b.len() {
        let hex = b
            .get(i + 1..i + 3)
            .and_then(|h| std::str::from_utf8(h).ok());
        match hex.and_then(|h| u8::from_str_radix(h, 16).ok()) {
            Some(v) if b[i] == b'%' => {
                out.push(v);
                i += 3;
            }
            _ => {
                out.push(b[i]);
                i += 1;
            }
        }
    }
    String::from_utf8(out).unwrap()
}

#[test]
fn the_index_page_lists_every_pack_in_a_browser_and_every_link_resolves() {
    let f = two_funds_two_months();
    let page = f.path("out/index.html");
    let html = std::fs::read_to_string(&page).unwrap();
    for banned in ["http://", "https://", "<script", "@import", "url("] {
        assert!(!html.contains(banned), "no network, no scripts: {banned}");
    }
    let Some(dom) = chromium_dom(&page, &f.path("chromium-profile")) else {
        return;
    };
    // Every pack the archive's index lists (index.json, written beside the page) is a row of the DOM.
    let rows: Vec<serde_json::Value> =
        serde_json::from_slice(&std::fs::read(f.path("out/index.json")).unwrap()).unwrap();
    assert_eq!(rows.len(), 4);
    for r in &rows {
        let path = r["path"].as_str().unwrap();
        assert!(
            dom.contains(&format!("<tr data-pack=\"{path}\">")),
            "{path} missing from the page as the browser read it:\n{dom}"
        );
        assert!(dom.contains(r["pack_id"].as_str().unwrap()));
    }
    assert_eq!(dom.matches("<tr data-pack=").count(), 4);
    // The fund name's markup is text, not elements.
    assert!(
        dom.contains("Second &lt;b&gt;Fund&lt;/b&gt; &amp; Co (fictional)"),
        "{dom}"
    );
    assert!(!dom.contains("<b>Fund</b>"));
    // Every link is relative and its target exists: a PDF, a summary and a manifest per pack.
    let targets = links(&dom);
    assert_eq!(targets.len(), 12, "{targets:?}");
    for t in &targets {
        assert!(
            !t.contains(':') && !t.starts_with('/'),
            "relative link: {t}"
        );
        assert!(f.path("out").join(t).is_file(), "link target {t} exists");
    }
}
