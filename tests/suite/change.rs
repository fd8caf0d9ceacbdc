//! The change since the previous pack: the CVaR decomposition on a hand-worked example and on random
//! months against an independent CVaR, and two runs into one archive at consecutive month-ends (the second
//! names the first, a tampered first is reported and not used, the second re-runs to identical bytes).

use super::common::{Fixture, Market, config, json, pdf_text, solid};
use rand::{RngExt, SeedableRng};
use std::path::PathBuf;
use tailpack::analysis::change::{Month, decompose};

fn w(pairs: &[(&str, f64)]) -> Vec<(String, f64)> {
    pairs.iter().map(|(a, x)| (a.to_string(), *x)).collect()
}

/// CVaR_c by its minimisation formula (Rockafellar & Uryasev 2000, Theorem 1):
/// CVaR = min_ℓ ℓ + E[(L − ℓ)+]/(1 − c), the minimum attained at one of the losses; written here
/// independently of the library's sort-and-quantile code.
fn cvar_by_minimum(losses: &[f64], probs: &[f64], c: f64) -> f64 {
    losses
        .iter()
        .map(|&l| {
            l + losses
                .iter()
                .zip(probs)
                .map(|(x, p)| p * (x - l).max(0.0))
                .sum::<f64>()
                / (1.0 - c)
        })
        .fold(f64::INFINITY, f64::min)
}

/// Hand-worked example, three assets in each month, four equally likely scenarios, c = 0.5, so CVaR is
/// the mean of the two worst losses (Rockafellar & Uryasev 2002, CVaR of a discrete distribution whose
/// tail 1 − c holds whole scenarios). Last month: assets A, B, C; this month C is gone and D is new.
///
/// Last month's returns (A, B, C): s1 (.02, .01, 0), s2 (−.04, .02, −.01), s3 (−.01, −.03, .03),
/// s4 (.03, −.01, −.02). This month's (A, B, D): s1 (−.05, .01, .02), s2 (.01, 0, −.05),
/// s3 (.02, −.02, .01), s4 (−.01, .03, 0).
/// Holdings: last month A .5, B .3, C .2; this month A .6, B .2, D .2.
///
/// before: losses of (.5, .3, .2) on last month: −.013, .016, .008, −.008 → worst two .016, .008 → .012.
/// mixed: this month's holdings on last month (D returns 0 there): losses −.014, .020, .012, −.016 →
///        worst two .020, .012 → .016; holdings effect = .016 − .012 = +.004.
/// after: this month's holdings on this month: losses .024, .004, −.010, 0 → worst two .024, .004 →
///        .014; market effect = .014 − .016 = −.002. Sum .002 = .014 − .012.
#[test]
fn hand_worked_three_asset_example_with_an_asset_dropped_and_one_added() {
    let then_assets: Vec<String> = ["A", "B", "C"].iter().map(|s| s.to_string()).collect();
    let now_assets: Vec<String> = ["A", "B", "D"].iter().map(|s| s.to_string()).collect();
    let then_rows = [
        [0.02, 0.01, 0.0],
        [-0.04, 0.02, -0.01],
        [-0.01, -0.03, 0.03],
        [0.03, -0.01, -0.02],
    ];
    let now_rows = [
        [-0.05, 0.01, 0.02],
        [0.01, 0.0, -0.05],
        [0.02, -0.02, 0.01],
        [-0.01, 0.03, 0.0],
    ];
    let p = [0.25; 4];
    let then = Month {
        assets: &then_assets,
        returns: then_rows.iter().map(|r| &r[..]).collect(),
        probabilities: &p,
        offsets: None,
    };
    let now = Month {
        assets: &now_assets,
        returns: now_rows.iter().map(|r| &r[..]).collect(),
        probabilities: &p,
        offsets: None,
    };
    let d = decompose(
        &then,
        &w(&[("A", 0.5), ("B", 0.3), ("C", 0.2)]),
        &now,
        &w(&[("A", 0.6), ("B", 0.2), ("D", 0.2)]),
        0.5,
    );
    let close = |a: f64, b: f64| (a - b).abs() < 1e-12;
    assert!(close(d.before, 0.012), "{d:?}");
    assert!(close(d.mixed, 0.016), "{d:?}");
    assert!(close(d.after, 0.014), "{d:?}");
    assert!(close(d.holdings_effect(), 0.004), "{d:?}");
    assert!(close(d.market_effect(), -0.002), "{d:?}");
}

/// On random months (different universes, unequal probabilities, several confidences) each CVaR of the
/// decomposition equals the minimisation formula's, and the two effects add up to the change to the
/// last bit of round-off (|sum − change| ≤ 4 ulp of the largest figure).
#[test]
fn the_two_effects_add_up_to_the_change_on_random_months() {
    let mut rng = rand::rngs::StdRng::seed_from_u64(17);
    for case in 0..200 {
        let then_assets: Vec<String> = ["A", "B", "C", "E"].iter().map(|s| s.to_string()).collect();
        let now_assets: Vec<String> = ["B", "A", "D"].iter().map(|s| s.to_string()).collect();
        let month = |rng: &mut rand::rngs::StdRng, n: usize, k: usize| {
            let rows: Vec<Vec<f64>> = (0..k)
                .map(|_| (0..n).map(|_| rng.random_range(-0.08..0.08)).collect())
                .collect();
            let raw: Vec<f64> = (0..k).map(|_| rng.random_range(0.1..1.0)).collect();
            let s: f64 = raw.iter().sum();
            (rows, raw.iter().map(|x| x / s).collect::<Vec<f64>>())
        };
        let (tr, tp) = month(&mut rng, 4, 30);
        let (nr, np) = month(&mut rng, 3, 40);
        let then = Month {
            assets: &then_assets,
            returns: tr.iter().map(Vec::as_slice).collect(),
            probabilities: &tp,
            offsets: None,
        };
        let now = Month {
            assets: &now_assets,
            returns: nr.iter().map(Vec::as_slice).collect(),
            probabilities: &np,
            offsets: None,
        };
        let then_w = w(&[("A", 0.4), ("B", 0.3), ("C", 0.2), ("E", 0.1)]);
        let now_w = w(&[("B", 0.5), ("A", 0.3), ("D", 0.2)]);
        let c = [0.9, 0.95, 0.8][case % 3];
        let d = decompose(&then, &then_w, &now, &now_w, c);
        // Independent losses: this month's holdings on last month use A and B only (D has return 0 there).
        let l_before: Vec<f64> = tr
            .iter()
            .map(|r| -(0.4 * r[0] + 0.3 * r[1] + 0.2 * r[2] + 0.1 * r[3]))
            .collect();
        let l_mixed: Vec<f64> = tr.iter().map(|r| -(0.3 * r[0] + 0.5 * r[1])).collect();
        let l_after: Vec<f64> = nr
            .iter()
            .map(|r| -(0.5 * r[0] + 0.3 * r[1] + 0.2 * r[2]))
            .collect();
        for (got, want) in [
            (d.before, cvar_by_minimum(&l_before, &tp, c)),
            (d.mixed, cvar_by_minimum(&l_mixed, &tp, c)),
            (d.after, cvar_by_minimum(&l_after, &np, c)),
        ] {
            assert!((got - want).abs() < 1e-12, "case {case}: {got} vs {want}");
        }
        let sum = d.holdings_effect() + d.market_effect();
        let scale = d.before.abs().max(d.after.abs()).max(d.mixed.abs());
        assert!(
            (sum - (d.after - d.before)).abs() <= 4.0 * f64::EPSILON * scale,
            "case {case}: {sum} vs {}",
            d.after - d.before
        );
    }
}

fn last_line(s: &str) -> PathBuf {
    PathBuf::from(s.lines().last().expect("output"))
}

/// A fund run at two month-ends into one archive, the holdings changed in between; returns the fixture
/// and the first pack (the second is run by the caller, after any tampering).
fn first_month() -> (Fixture, PathBuf) {
    let f = Fixture::new();
    let m = Market::new(4, "2021-01-01", "2024-06-28", 21);
    f.small_fund(&m, &config("analysis:\n  backtest_years: 1\n"));
    let ran = f.run(&["run", "fund.yaml", "--quiet", "--as-of", "2024-05-31"]);
    assert_eq!(ran.code, 0, "{}", ran.stderr);
    f.write(
        "data/holdings.csv",
        "asset,weight\nAS01,0.4\nAS02,0.3\nAS03,0.2\nAS04,0.1\n",
    );
    (f, last_line(&ran.stdout))
}

fn second_month(f: &Fixture) -> PathBuf {
    let ran = f.run(&["run", "fund.yaml", "--quiet", "--as-of", "2024-06-28"]);
    assert_eq!(ran.code, 0, "{}", ran.stderr);
    last_line(&ran.stdout)
}

fn check<'a>(r: &'a serde_json::Value, id: &str) -> &'a serde_json::Value {
    r["checks"]
        .as_array()
        .unwrap()
        .iter()
        .find(|c| c["id"] == id)
        .unwrap_or_else(|| panic!("no check {id}"))
}

/// The current portfolio's CVaR at the pack's confidence, as the pack's own risk profile states it.
fn current_cvar(r: &serde_json::Value) -> f64 {
    let c = r["confidence"].as_f64().unwrap();
    r["current"]["levels"]
        .as_array()
        .unwrap()
        .iter()
        .find(|t| (t["level"].as_f64().unwrap() - c).abs() < 1e-12)
        .unwrap()["cvar"]
        .as_f64()
        .unwrap()
}

#[test]
fn the_second_month_names_the_first_pack_and_reruns_to_identical_bytes() {
    let (f, first) = first_month();
    let one = json(&first.join("results.json"));
    assert!(one["change"]["previous"].is_null(), "{}", one["change"]);
    assert!(
        check(&one, "change.previous")["message"]
            .as_str()
            .unwrap()
            .contains("first pack"),
    );
    // A first pack has no "Since the last pack" section; its summary says why, and the sentences that
    // name a section carry the numbers printed in that pack (the section's absence moves them up by one).
    let first_pdf = solid(&pdf_text(&first.join("pack.pdf")));
    assert!(
        first_pdf.contains("Sincethelastpack:thisisthefund'sfirstpackinthearchive"),
        "the first pack's summary says there is nothing to compare with"
    );
    assert!(!first_pdf.contains("3Sincethelastpack"), "no such section");
    assert!(first_pdf.contains("6.2Stresstests") && first_pdf.contains("(section6.2)"));
    let second = second_month(&f);
    let two = json(&second.join("results.json"));
    let ch = &two["change"];
    assert_eq!(ch["previous"]["pack_id"], one["pack_id"], "{ch}");
    assert_eq!(ch["previous"]["as_of"], "2024-05-31");
    assert_eq!(ch["previous"]["revision"], 1);
    assert_eq!(ch["previous"]["verified"], true);
    assert_eq!(check(&two, "change.previous")["level"], "pass");
    // The decomposition's ends are each pack's own CVaR of its holdings (both at 95%, the default).
    let cv = &ch["current_cvar"];
    let (before, after) = (
        cv["before"].as_f64().unwrap(),
        cv["after"].as_f64().unwrap(),
    );
    assert!((before - current_cvar(&one)).abs() < 1e-12, "{cv}");
    assert!((after - current_cvar(&two)).abs() < 1e-12, "{cv}");
    let (h, m) = (
        cv["holdings_effect"].as_f64().unwrap(),
        cv["market_effect"].as_f64().unwrap(),
    );
    assert!((h + m - (after - before)).abs() < 1e-15, "{cv}");
    assert!(h != 0.0, "the holdings changed: {cv}");
    // Holdings compared weight by weight: AS01 went from 1/4 to 0.4.
    let as01 = &ch["portfolios"]["current"]["weights"]["AS01"];
    assert!(
        (as01["before"].as_f64().unwrap() - 0.25).abs() < 1e-12,
        "{as01}"
    );
    assert!(
        (as01["change"].as_f64().unwrap() - 0.15).abs() < 1e-12,
        "{as01}"
    );
    // One month later the window has moved: new scenarios came in.
    assert!(
        ch["data"]["scenarios"]["moved"]["new"].as_u64().unwrap() > 0,
        "{ch}"
    );
    let hist = ch["history"].as_array().unwrap();
    assert_eq!(hist.len(), 2);
    assert_eq!(hist[0]["pack_id"], one["pack_id"]);
    assert_eq!(hist[1]["pack_id"], two["pack_id"]);
    // The PDF's page prints the previous as-of and both CVaR figures as results.json holds them.
    let pdf = pdf_text(&second.join("pack.pdf"));
    let flat = solid(&pdf);
    assert!(flat.contains("3Sincethelastpack") && flat.contains("7.2Stresstests"));
    assert!(
        flat.contains("(section7.2)"),
        "the summary names the stress section by its number"
    );
    let page = &pdf[pdf.rfind("Since the last pack").expect("the page")..];
    for want in [
        "2024-05-31".to_string(),
        format!("{:.2}%", before * 100.0),
        format!("{:.2}%", after * 100.0),
    ] {
        assert!(page.contains(&want), "{want} not on the page:\n{page}");
    }
    let rerun = f.run(&["verify", second.to_str().unwrap(), "--rerun"]);
    assert_eq!(rerun.code, 0, "{}{}", rerun.stdout, rerun.stderr);
    assert!(
        rerun.stdout.contains("identical outputs"),
        "{}",
        rerun.stdout
    );
}

/// April's pack is tampered with (a byte of its results.json): May names it in a fail check and does not
/// use it; June compares with May and keeps April in its history without figures, with a warning.
#[test]
fn a_tampered_previous_pack_is_reported_in_a_fail_check_and_not_used() {
    let f = Fixture::new();
    let m = Market::new(4, "2021-01-01", "2024-06-28", 21);
    f.small_fund(&m, &config("analysis:\n  backtest_years: 1\n"));
    let run = |as_of: &str| {
        let ran = f.run(&["run", "fund.yaml", "--quiet", "--as-of", as_of]);
        assert_eq!(ran.code, 0, "{}", ran.stderr);
        last_line(&ran.stdout)
    };
    let april = run("2024-04-30");
    let path = april.join("results.json");
    let mut bytes = std::fs::read(&path).unwrap();
    let at = bytes.iter().position(|b| *b == b'7').expect("a digit 7");
    bytes[at] = b'8';
    std::fs::write(&path, bytes).unwrap();
    let may = run("2024-05-31");
    let two = json(&may.join("results.json"));
    let c = check(&two, "change.previous");
    assert_eq!(c["level"], "fail", "{c}");
    let msg = c["message"].as_str().unwrap();
    assert!(
        msg.contains("2024-04-30/r1") && msg.contains("results.json") && msg.contains("not used"),
        "{msg}"
    );
    let ch = &two["change"];
    assert_eq!(ch["previous"]["verified"], false, "{ch}");
    assert!(ch["current_cvar"].is_null(), "{ch}");
    assert!(ch["portfolios"].is_null(), "{ch}");
    let three = json(&run("2024-06-28").join("results.json"));
    assert_eq!(check(&three, "change.previous")["level"], "pass");
    assert_eq!(three["change"]["previous"]["as_of"], "2024-05-31");
    let h = check(&three, "change.history");
    assert_eq!(h["level"], "warn", "{h}");
    assert!(
        h["message"].as_str().unwrap().contains("2024-04-30/r1"),
        "{h}"
    );
    let first = &three["change"]["history"][0];
    assert_eq!(first["verified"], false, "{first}");
    assert!(first["cvar"].is_null(), "{first}");
}

/// The choice among revisions and what a re-run sees: a later run prefers a finalised revision of the
/// previous month to a later draft; a re-run compares with the revision the pack recorded, also after a
/// newer revision of that month was written and after it was finalised.
#[test]
fn a_rerun_keeps_its_previous_pack_and_a_finalised_revision_is_preferred() {
    let f = Fixture::new();
    std::fs::create_dir_all(f.path("keys")).unwrap();
    assert_eq!(f.run(&["keygen", "keys/chair"]).code, 0);
    let public = std::fs::read_to_string(f.path("keys/chair.pub")).unwrap();
    let m = Market::new(4, "2021-01-01", "2024-06-28", 21);
    let tail = format!(
        "analysis:\n  backtest_years: 0\nsignoff:\n  roles:\n    - {{ role: chair, title: Chair, keys: [\"{}\"] }}\n",
        public.trim()
    );
    f.small_fund(&m, &config(&tail));
    let holdings = |w: [f64; 4]| {
        f.write(
            "data/holdings.csv",
            &format!(
                "asset,weight\nAS01,{}\nAS02,{}\nAS03,{}\nAS04,{}\n",
                w[0], w[1], w[2], w[3]
            ),
        );
    };
    let run = |as_of: &str| {
        let ran = f.run(&["run", "fund.yaml", "--quiet", "--as-of", as_of]);
        assert_eq!(ran.code, 0, "{}", ran.stderr);
        last_line(&ran.stdout)
    };
    let may_r1 = run("2024-05-31");
    holdings([0.4, 0.3, 0.2, 0.1]);
    let june = run("2024-06-28");
    holdings([0.1, 0.2, 0.3, 0.4]);
    let may_r2 = run("2024-05-31");
    assert!(may_r2.ends_with("r2"), "{}", may_r2.display());
    let rerun = |pack: &PathBuf| {
        let ran = f.run(&["verify", pack.to_str().unwrap(), "--rerun"]);
        assert_eq!(ran.code, 0, "{}{}", ran.stdout, ran.stderr);
    };
    // A run now would pick May's r2; June's re-run still compares with r1, as recorded.
    rerun(&june);
    let p = may_r1.to_str().unwrap();
    let signed = f.run(&[
        "sign",
        p,
        "--role",
        "chair",
        "--key",
        "keys/chair.key",
        "--name",
        "A. Chair",
    ]);
    assert_eq!(signed.code, 0, "{}", signed.stderr);
    let fin = f.run(&["finalize", p, "--role", "chair", "--key", "keys/chair.key"]);
    assert_eq!(fin.code, 0, "{}", fin.stderr);
    // May r1 is final now; June recorded it as a draft and re-runs to the same bytes.
    rerun(&june);
    // A new June revision compares with May's final r1, not the later draft r2.
    holdings([0.25, 0.25, 0.25, 0.25]);
    let june_r2 = run("2024-06-28");
    assert!(june_r2.ends_with("r2"), "{}", june_r2.display());
    let r = json(&june_r2.join("results.json"));
    let prev = &r["change"]["previous"];
    assert_eq!(prev["revision"], 1, "{prev}");
    assert_eq!(prev["final"], true, "{prev}");
    assert_eq!(
        prev["pack_id"],
        json(&may_r1.join("results.json"))["pack_id"]
    );
}
