//! What changed since the fund's previous pack: holdings and every candidate's weights and figures, the
//! stress results, the checks and the data, and the change in the current portfolio's CVaR split into a
//! holdings effect and a market effect; with a short history of the fund's earlier packs.
//!
//! The archive and the sign-off layer come after this stage: they find and verify the earlier packs and
//! hand them here as plain data ([`Past`]: each pack's id, as-of, revision, verification outcome, its
//! `results.json` as a JSON value and the previous pack's scenarios as read back from its `scenarios.csv`).
//! This module reads no file; it compares the previous pack's results with this run's `results.json`
//! value, so both sides are read from the same published fields.
//!
//! Assets present in one month only: such an asset has weight 0 in the month without it and return 0 in
//! the scenarios of the month without it, so a portfolio of either month can be valued on either month's
//! scenarios (the union of both universes, in this month's order, then the dropped assets).

use crate::diag::Check;
use crate::scenarios::ScenarioSet;
use serde_json::{Map, Value, json};

/// One earlier pack of the fund, as the archive layer found and verified it.
#[derive(Debug, Clone, Default)]
pub struct Previous {
    pub pack_id: String,
    pub as_of: String,
    pub revision: u32,
    /// Its folder relative to the archive root (`<fund>/<as-of>/r<N>`).
    pub folder: String,
    /// Whether every digest (and signature) `verify` checks holds.
    pub verified: bool,
    /// Whether the pack was finalised (signed and sealed) when this run looked; a re-run takes it from the
    /// pack's own record, so finalising an earlier pack later does not change a later pack's outputs.
    pub final_pack: bool,
    /// The verification problems (`file: problem`), empty when verified.
    pub problems: Vec<String>,
    /// Its `results.json` (`Null` when not verified: an unverified pack's figures are never used).
    pub results: Value,
    /// Its scenarios as read back from `scenarios.csv` (the previous pack only; `None` for the history).
    pub scenarios: Option<PastScenarios>,
}

/// A pack's scenario set as written in its `scenarios.csv`.
#[derive(Debug, Clone, Default, PartialEq)]
pub struct PastScenarios {
    /// Row labels (`start/end`).
    pub labels: Vec<String>,
    pub assets: Vec<String>,
    /// Each row's probability (equal when the file has no probability column).
    pub probabilities: Vec<f64>,
    /// One row of asset returns per scenario.
    pub returns: Vec<Vec<f64>>,
    /// On the surplus basis, the liabilities' part of each scenario's loss, ℓ_k / F (the proxy's column
    /// of the pack's `reference-scenarios.csv` over its funded ratio); `None` on the assets' basis.
    pub offsets: Option<Vec<f64>>,
}

/// The fund's earlier packs as a run sees them: the previous one (`None` for the fund's first pack) and
/// up to [`HISTORY`] − 1 earlier ones for the history, oldest first (the previous one included).
#[derive(Debug, Clone, Default)]
pub struct Past {
    pub previous: Option<Previous>,
    pub history: Vec<Previous>,
}

/// How many packs the history covers, this one included.
pub const HISTORY: usize = 12;

/// Check id of the comparison with the previous pack.
pub const CHECK_ID: &str = "change.previous";

/// The rule the comparison and the decomposition follow, as results.json states it.
pub const RULE: &str = "previous pack: the latest as-of of the fund before this one in the archive, its highest revision, a finalised revision preferred; verified as `verify` does before use. CVaR change = holdings effect + market effect: holdings = CVaR(this month's holdings on last month's scenarios) − CVaR(last month's holdings on last month's scenarios); market = CVaR(this month's holdings on this month's scenarios) − CVaR(this month's holdings on last month's scenarios); both at this run's confidence (Rockafellar & Uryasev 2002). An asset in one month only has weight 0 and return 0 in the other month.";

/// The checks on the earlier packs: [`previous_check`], and a warning naming every older pack of the
/// history that fails verification (its figures are left out of the history).
pub fn checks(past: &Past) -> Vec<Check> {
    let mut out = previous_check(past);
    let n = past.history.len().saturating_sub(1);
    let bad: Vec<String> = past.history[..n]
        .iter()
        .filter(|h| !h.verified)
        .map(|h| format!("{} ({})", h.folder, h.problems.join("; ")))
        .collect();
    if !bad.is_empty() {
        out.push(Check::warn(
            "change.history",
            format!(
                "{} earlier pack(s) of the history fail verification; their figures are left out: {}",
                bad.len(),
                bad.join("; ")
            ),
        ));
    }
    out
}

/// The check on the previous pack: a pass naming it, a pass saying there is none, or a fail naming the
/// pack that fails verification (then not used).
fn previous_check(past: &Past) -> Vec<Check> {
    let Some(p) = &past.previous else {
        return vec![Check::pass(
            CHECK_ID,
            "first pack of this fund in the archive: no earlier pack to compare with",
        )];
    };
    if !p.verified {
        return vec![Check::fail(
            CHECK_ID,
            format!(
                "the previous pack {} (pack id {}, as of {}, revision {}) fails verification and is not used: nothing is compared with it; {}",
                p.folder,
                p.pack_id,
                p.as_of,
                p.revision,
                p.problems.join("; ")
            ),
        )];
    }
    let fin = if p.final_pack { ", final" } else { "" };
    vec![Check::pass(
        CHECK_ID,
        format!(
            "compared with the previous pack {} (pack id {}, as of {}, revision {}{fin}); it verifies",
            p.folder, p.pack_id, p.as_of, p.revision
        ),
    )]
}

/// Reads a `scenarios.csv` text (`scenario[,probability],<assets…>`, RFC 4180 fields); `None` when it is
/// not one.
pub fn parse_scenarios(text: &str) -> Option<PastScenarios> {
    let mut lines = text.lines();
    let head = fields(lines.next()?);
    let with_p = head.get(1).map(String::as_str) == Some("probability");
    let skip = if with_p { 2 } else { 1 };
    let assets: Vec<String> = head.get(skip..)?.to_vec();
    let mut out = PastScenarios {
        assets,
        ..Default::default()
    };
    for line in lines.filter(|l| !l.is_empty()) {
        let f = fields(line);
        if f.len() != skip + out.assets.len() {
            return None;
        }
        out.labels.push(f[0].clone());
        if with_p {
            out.probabilities.push(f[1].parse().ok()?);
        }
        let row: Option<Vec<f64>> = f[skip..].iter().map(|v| v.parse().ok()).collect();
        out.returns.push(row?);
    }
    if !with_p {
        let n = out.returns.len();
        out.probabilities = vec![1.0 / n as f64; n];
    }
    (!out.returns.is_empty()).then_some(out)
}

/// The fields of one CSV line, quotes per RFC 4180 (a doubled quote inside a quoted field is one quote).
fn fields(line: &str) -> Vec<String> {
    let (mut out, mut cur, mut quoted) = (Vec::new(), String::new(), false);
    let mut chars = line.chars().peekable();
    while let Some(ch) = chars.next() {
        match (ch, quoted) {
            ('"', true) if chars.peek() == Some(&'"') => {
                cur.push('"');
                chars.next();
            }
            ('"', _) => quoted = !quoted,
            (',', false) => out.push(std::mem::take(&mut cur)),
            _ => cur.push(ch),
        }
    }
    out.push(cur);
    out
}

/// The CVaR change of the current portfolio split in two (see the module doc and [`RULE`]).
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Decomposition {
    /// CVaR of last month's holdings on last month's scenarios.
    pub before: f64,
    /// CVaR of this month's holdings on last month's scenarios.
    pub mixed: f64,
    /// CVaR of this month's holdings on this month's scenarios.
    pub after: f64,
}

impl Decomposition {
    pub fn holdings_effect(&self) -> f64 {
        self.mixed - self.before
    }
    pub fn market_effect(&self) -> f64 {
        self.after - self.mixed
    }
}

/// A month: its scenarios with a portfolio's weights by asset name.
pub struct Month<'a> {
    pub assets: &'a [String],
    /// One row of returns per scenario, in `assets` order.
    pub returns: Vec<&'a [f64]>,
    pub probabilities: &'a [f64],
    /// On the surplus basis, what each scenario's loss adds for the liabilities (ℓ_k / F): the loss is
    /// then ℓ_k / F − r_k·x, the surplus loss. `None` on the assets' basis.
    pub offsets: Option<&'a [f64]>,
}

/// The basis a results.json measures CVaR on: `liabilities.basis`, `assets` without liabilities.
pub fn basis_of(results: &Value) -> &str {
    results["liabilities"]["basis"].as_str().unwrap_or("assets")
}

/// The surplus basis' offsets ℓ_k / F of a pack on the surplus basis, from its results.json (proxy and
/// funded ratio) and the text of its `reference-scenarios.csv`; `None` on the assets' basis or when the
/// file does not give them.
pub fn surplus_offsets(results: &Value, reference_csv: &str) -> Option<Vec<f64>> {
    if basis_of(results) != "surplus" {
        return None;
    }
    let l = &results["liabilities"];
    let (proxy, f) = (l["proxy"].as_str()?, l["funded_ratio"].as_f64()?);
    let table = parse_scenarios(reference_csv)?;
    let j = table.assets.iter().position(|a| a == proxy)?;
    Some(table.returns.iter().map(|row| row[j] / f).collect())
}

/// CVaR_c of `weights` (by asset name; an asset the month lacks has return 0 there, one the weights lack
/// has weight 0) on a month's scenarios (Rockafellar & Uryasev 2002, via [`crate::risk::var_cvar`]).
pub fn cvar_on(month: &Month, weights: &[(String, f64)], c: f64) -> f64 {
    let w: Vec<f64> = month
        .assets
        .iter()
        .map(|a| weights.iter().find(|(b, _)| b == a).map_or(0.0, |x| x.1))
        .collect();
    let losses: Vec<f64> = month
        .returns
        .iter()
        .enumerate()
        .map(|(k, row)| {
            let offset = month.offsets.map_or(0.0, |c| c[k]);
            offset - row.iter().zip(&w).map(|(r, x)| r * x).sum::<f64>()
        })
        .collect();
    crate::risk::var_cvar(&losses, month.probabilities, c).cvar
}

/// The decomposition for last month (`then`, with its holdings) and this month (`now`, with its).
pub fn decompose(
    then: &Month,
    then_w: &[(String, f64)],
    now: &Month,
    now_w: &[(String, f64)],
    c: f64,
) -> Decomposition {
    Decomposition {
        before: cvar_on(then, then_w, c),
        mixed: cvar_on(then, now_w, c),
        after: cvar_on(now, now_w, c),
    }
}

/// This run's scenarios as the comparison sees them: the assets' returns and, on the surplus basis, the
/// offsets ℓ_k / F of [`Month::offsets`].
pub struct Now<'a> {
    pub set: &'a ScenarioSet,
    pub offsets: Option<&'a [f64]>,
}

/// results.json's `change`: the previous pack, the CVaR decomposition and the comparisons, and the
/// history; `current` is this run's results.json value without `change`.
pub fn section(past: &Past, current: &Value, now: &Now, confidence: f64) -> Value {
    let history = history(past, current);
    let Some(p) = &past.previous else {
        return json!({"previous": null, "note": "first pack of this fund: nothing to compare with",
                      "rule": RULE, "history": history});
    };
    let previous = json!({"pack_id": p.pack_id, "as_of": p.as_of, "revision": p.revision,
                          "verified": p.verified, "final": p.final_pack, "folder": p.folder});
    if !p.verified {
        return json!({"previous": previous, "current_cvar": null, "rule": RULE,
                      "note": "the previous pack fails verification and is not used", "history": history});
    }
    let old = &p.results;
    json!({
        "previous": previous,
        "rule": RULE,
        "basis": {"before": basis_of(old), "after": basis_of(current)},
        "current_cvar": current_cvar(p, current, now, confidence),
        "portfolios": portfolios(old, current),
        "stress": stress(old, current),
        "checks": check_changes(old, current),
        "data": data(p, old, current, now.set),
        "history": history,
    })
}

/// The current portfolio's weights by asset name from a results.json (`constraints.current`).
fn holdings(results: &Value) -> Option<Vec<(String, f64)>> {
    let map = results["constraints"]["current"].as_object()?;
    Some(weights_of(map))
}

fn weights_of(map: &Map<String, Value>) -> Vec<(String, f64)> {
    map.iter()
        .map(|(a, w)| (a.clone(), w.as_f64().unwrap_or(0.0)))
        .collect()
}

/// The decomposition of the current portfolio's CVaR on the basis both packs measure it on, or `null`
/// with the reason when a month has no holdings, the two packs measure CVaR on different bases, or the
/// previous scenarios (or, on the surplus basis, its liability proxy's returns) could not be read back.
fn current_cvar(p: &Previous, current: &Value, now: &Now, c: f64) -> Value {
    let (Some(then_w), Some(now_w)) = (holdings(&p.results), holdings(current)) else {
        return json!({"note": "no current holdings in one of the two packs: no decomposition"});
    };
    let (before, after) = (basis_of(&p.results), basis_of(current));
    if before != after {
        return json!({"note": format!("the previous pack measured CVaR on the {before} basis and this one on the {after} basis: the two are not comparable, so there is no decomposition")});
    }
    let Some(sc) = &p.scenarios else {
        return json!({"note": "the previous pack's scenarios.csv could not be read back"});
    };
    if after == "surplus" && (sc.offsets.is_none() || now.offsets.is_none()) {
        return json!({"note": "the previous pack's liability proxy returns (its reference-scenarios.csv) could not be read back"});
    }
    let then = Month {
        assets: &sc.assets,
        returns: sc.returns.iter().map(Vec::as_slice).collect(),
        probabilities: &sc.probabilities,
        offsets: sc.offsets.as_deref(),
    };
    let set = now.set;
    let now = Month {
        assets: &set.assets,
        returns: (0..set.len()).map(|k| set.row(k)).collect(),
        probabilities: &set.probabilities,
        offsets: now.offsets,
    };
    let d = decompose(&then, &then_w, &now, &now_w, c);
    json!({"before": d.before, "after": d.after, "holdings_effect": d.holdings_effect(),
           "market_effect": d.market_effect(), "holdings_on_previous_scenarios": d.mixed, "confidence": c,
           "basis": after})
}

/// `{before, after, change}` of two optional figures.
fn delta(before: &Value, after: &Value) -> Value {
    let change = before.as_f64().zip(after.as_f64()).map(|(b, a)| a - b);
    json!({"before": before, "after": after, "change": change})
}

/// The (VaR, CVaR) at confidence `c` from a risk profile's `levels` array.
fn tail(levels: &Value, c: f64) -> (Value, Value) {
    levels
        .as_array()
        .and_then(|l| {
            l.iter()
                .find(|t| t["level"].as_f64().is_some_and(|x| (x - c).abs() < 1e-12))
        })
        .map_or((Value::Null, Value::Null), |t| {
            (t["var"].clone(), t["cvar"].clone())
        })
}

/// Every portfolio's figures in one results.json: name → (weights, expected return, VaR, CVaR, active
/// CVaR, cost, status). The current holdings come first under `current`.
fn figures(r: &Value) -> Vec<(String, Value)> {
    let c = r["confidence"].as_f64().unwrap_or(0.0);
    let active = |name: &str| r["policy"]["active"][name]["active_cvar"].clone();
    let mut out = Vec::new();
    if !r["current"].is_null() {
        let (var, cvar) = tail(&r["current"]["levels"], c);
        out.push((
            "current".to_string(),
            json!({"weights": r["constraints"]["current"], "status": "given",
            "expected_return": r["current"]["expected_return"], "var": var, "cvar": cvar,
            "active_cvar": active("current"), "cost": null}),
        ));
    }
    if let Some(models) = r["models"].as_object() {
        for (name, m) in models {
            out.push((
                name.clone(),
                json!({"weights": m["weights"], "status": m["status"],
                "expected_return": m["expected_return"], "var": m["var"], "cvar": m["cvar"],
                "active_cvar": active(name), "cost": m["cost"]}),
            ));
        }
    }
    out
}

/// Asset → class of one results.json.
fn classes(r: &Value) -> Vec<(String, String)> {
    let names = r["assets"].as_array().cloned().unwrap_or_default();
    let cls = r["classes"].as_array().cloned().unwrap_or_default();
    names
        .iter()
        .zip(&cls)
        .map(|(a, c)| {
            (
                a.as_str().unwrap_or("").to_string(),
                c.as_str().unwrap_or("").to_string(),
            )
        })
        .collect()
}

/// Weights summed by class (an asset without a class in `cls` counts under its own name).
fn by_class(w: &Value, cls: &[(String, String)]) -> Vec<(String, f64)> {
    let mut out: Vec<(String, f64)> = Vec::new();
    for (a, x) in w.as_object().map(weights_of).unwrap_or_default() {
        let k = cls
            .iter()
            .find(|(b, _)| *b == a)
            .map_or(a.clone(), |(_, c)| c.clone());
        match out.iter_mut().find(|(c, _)| *c == k) {
            Some(e) => e.1 += x,
            None => out.push((k, x)),
        }
    }
    out
}

/// `{key: {before, after, change}}` over the union of both lists' keys (this month's order first);
/// a side without the key counts 0 when it has a list at all.
fn paired(before: Option<&[(String, f64)]>, after: Option<&[(String, f64)]>) -> Value {
    let mut keys: Vec<&String> = after.unwrap_or(&[]).iter().map(|(k, _)| k).collect();
    for (k, _) in before.unwrap_or(&[]) {
        if !keys.contains(&k) {
            keys.push(k);
        }
    }
    let get = |side: Option<&[(String, f64)]>, k: &String| -> Value {
        side.map_or(Value::Null, |s| {
            json!(s.iter().find(|(j, _)| j == k).map_or(0.0, |x| x.1))
        })
    };
    Value::Object(
        keys.into_iter()
            .map(|k| (k.clone(), delta(&get(before, k), &get(after, k))))
            .collect(),
    )
}

/// Each portfolio of either pack: weights by asset and by class, expected return, VaR, CVaR, active
/// CVaR and cost, before and after.
fn portfolios(old: &Value, now: &Value) -> Value {
    let (a, b) = (figures(old), figures(now));
    let (ca, cb) = (classes(old), classes(now));
    let mut names: Vec<String> = b.iter().map(|x| x.0.clone()).collect();
    names.extend(
        a.iter()
            .map(|x| x.0.clone())
            .filter(|n| !b.iter().any(|y| y.0 == *n)),
    );
    let find = |list: &[(String, Value)], n: &str| {
        list.iter()
            .find(|x| x.0 == n)
            .map_or(Value::Null, |x| x.1.clone())
    };
    let one = |n: &String| {
        let (x, y) = (find(&a, n), find(&b, n));
        let w = |v: &Value| v["weights"].as_object().map(weights_of);
        let (wx, wy) = (w(&x), w(&y));
        let cx = wx.as_ref().map(|_| by_class(&x["weights"], &ca));
        let cy = wy.as_ref().map(|_| by_class(&y["weights"], &cb));
        let mut o = json!({"status": {"before": x["status"], "after": y["status"]},
            "weights": paired(wx.as_deref(), wy.as_deref()),
            "by_class": paired(cx.as_deref(), cy.as_deref())});
        for key in ["expected_return", "var", "cvar", "active_cvar", "cost"] {
            o[key] = delta(&x[key], &y[key]);
        }
        (n.clone(), o)
    };
    Value::Object(names.iter().map(one).collect())
}

/// Shock name → P&L of one portfolio in one results.json.
fn pnl(r: &Value, portfolio: &str) -> Vec<(String, f64)> {
    let shocks = r["stress"]["shocks"]
        .as_array()
        .cloned()
        .unwrap_or_default();
    let pnl = r["stress"]["portfolios"][portfolio]["pnl"]
        .as_array()
        .cloned()
        .unwrap_or_default();
    shocks
        .iter()
        .zip(&pnl)
        .filter_map(|(s, v)| Some((s["name"].as_str()?.to_string(), v.as_f64()?)))
        .collect()
}

/// Every stress result of every portfolio in either pack, shock by shock: `{portfolio: {shock: {before,
/// after, change}}}` (a side without the shock or portfolio is `null`).
fn stress(old: &Value, now: &Value) -> Value {
    let names = |r: &Value| -> Vec<String> {
        r["stress"]["portfolios"]
            .as_object()
            .map_or(vec![], |m| m.keys().cloned().collect())
    };
    let mut all = names(now);
    all.extend(names(old).into_iter().filter(|n| !names(now).contains(n)));
    let side = |r: &Value, n: &str| {
        let v = pnl(r, n);
        (!v.is_empty()).then_some(v)
    };
    Value::Object(
        all.iter()
            .map(|n| {
                let (a, b) = (side(old, n), side(now, n));
                (n.clone(), paired_strict(a.as_deref(), b.as_deref()))
            })
            .collect(),
    )
}

/// As [`paired`], but a side missing a key gives `null` (a shock absent is not a zero loss).
fn paired_strict(before: Option<&[(String, f64)]>, after: Option<&[(String, f64)]>) -> Value {
    let mut keys: Vec<&String> = after.unwrap_or(&[]).iter().map(|(k, _)| k).collect();
    for (k, _) in before.unwrap_or(&[]) {
        if !keys.contains(&k) {
            keys.push(k);
        }
    }
    let get = |side: Option<&[(String, f64)]>, k: &String| -> Value {
        side.and_then(|s| s.iter().find(|(j, _)| j == k))
            .map_or(Value::Null, |x| json!(x.1))
    };
    Value::Object(
        keys.into_iter()
            .map(|k| (k.clone(), delta(&get(before, k), &get(after, k))))
            .collect(),
    )
}

/// The ids of a pack's open checks (warn or fail), sorted and without repeats.
fn open_checks(r: &Value) -> Vec<String> {
    let mut ids: Vec<String> = r["checks"].as_array().map_or(vec![], |l| {
        l.iter()
            .filter(|c| c["level"] != "pass")
            .filter_map(|c| c["id"].as_str().map(str::to_string))
            .collect()
    });
    ids.sort();
    ids.dedup();
    ids
}

/// Open checks by id: new (open now, not before), resolved (open before, not now), still open.
fn check_changes(old: &Value, now: &Value) -> Value {
    let (a, b) = (open_checks(old), open_checks(now));
    let new: Vec<&String> = b.iter().filter(|x| !a.contains(x)).collect();
    let resolved: Vec<&String> = a.iter().filter(|x| !b.contains(x)).collect();
    let still: Vec<&String> = b.iter().filter(|x| a.contains(x)).collect();
    json!({"new": new, "resolved": resolved, "still_open": still})
}

/// The data: assets added and dropped, and how the scenario window moved (scenarios by their
/// `start/end` labels: how many are new, how many fell out).
fn data(p: &Previous, old: &Value, now: &Value, set: &ScenarioSet) -> Value {
    let assets = |r: &Value| -> Vec<String> {
        r["assets"].as_array().map_or(vec![], |l| {
            l.iter()
                .filter_map(|a| a.as_str().map(str::to_string))
                .collect()
        })
    };
    let (a, b) = (assets(old), assets(now));
    let added: Vec<&String> = b.iter().filter(|x| !a.contains(x)).collect();
    let dropped: Vec<&String> = a.iter().filter(|x| !b.contains(x)).collect();
    let labels: Vec<String> = (0..set.len()).map(|k| set.label(k)).collect();
    let window = p.scenarios.as_ref().map(|sc| {
        let new = labels.iter().filter(|l| !sc.labels.contains(l)).count();
        let gone = sc.labels.iter().filter(|l| !labels.contains(l)).count();
        json!({"new": new, "dropped": gone})
    });
    let s = |k: &str| delta(&old["scenarios"][k], &now["scenarios"][k]);
    json!({"assets_added": added, "assets_dropped": dropped,
           "scenarios": {"count": s("count"), "first_start": {"before": old["scenarios"]["first_start"], "after": now["scenarios"]["first_start"]},
                         "last_end": {"before": old["scenarios"]["last_end"], "after": now["scenarios"]["last_end"]},
                         "moved": window}})
}

/// One history point from a pack's results.json: the current portfolio's expected return and CVaR at
/// the pack's confidence, its worst stress loss (the worst shock's P&L as a loss), and its breaches
/// (stress shocks beyond the loss limit, policy lines outside their range).
fn point(r: &Value) -> Value {
    let c = r["confidence"].as_f64().unwrap_or(0.0);
    let (_, cvar) = tail(&r["current"]["levels"], c);
    let worst = r["stress"]["portfolios"]["current"]["worst"]["pnl"]
        .as_f64()
        .map(|x| -x);
    let count = |v: &Value| v.as_array().map(Vec::len);
    json!({"expected_return": r["current"]["expected_return"], "cvar": cvar, "worst_stress_loss": worst,
           "stress_breaches": count(&r["stress"]["portfolios"]["current"]["breaches"]),
           "policy_breaches": count(&r["policy"]["portfolios"]["current"]["breaches"])})
}

/// The history, oldest first: each earlier pack (figures `null` when it fails verification), then this one.
fn history(past: &Past, current: &Value) -> Value {
    let mut out: Vec<Value> = past
        .history
        .iter()
        .map(|h| {
            let mut v = if h.verified {
                point(&h.results)
            } else {
                json!({})
            };
            v["pack_id"] = json!(h.pack_id);
            v["as_of"] = json!(h.as_of);
            v["revision"] = json!(h.revision);
            v["verified"] = json!(h.verified);
            v["final"] = json!(h.final_pack);
            v
        })
        .collect();
    let mut v = point(current);
    v["pack_id"] = current["pack_id"].clone();
    v["as_of"] = current["as_of"].clone();
    v["revision"] = Value::Null;
    v["verified"] = json!(true);
    v["final"] = json!(false);
    out.push(v);
    Value::Array(out)
}
