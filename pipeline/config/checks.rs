//! The range and shape checks of the raw config, section by section, and the rules resolved from them
//! (group limits, the CVaR cap, the return floor). Each returns the key at fault and why; [`super::resolve`]
//! turns that into a message with the key's line.

use super::raw::{
    AnalysisOptions, MAX_COST_BPS, MAX_GELTNER_RHO, QualityOptions, RawCap, RawCosts, RawCurrency,
    RawFloor, RawFund, RawGroup, RawLimits, RawReport, RawRisk, RawSignoff, RawStress,
    ScenarioOptions, TYPESET_MEMORY_MB, TYPESET_SECONDS,
};
use super::stress::check_tag;
use super::{CapRule, CostRates, Currency, FloorRule, GroupSelector, GroupSpec, Money};
use std::collections::BTreeMap;

/// A fixed key and what is wrong with its value.
pub(super) type KeyError = (&'static str, String);
/// A key with an index in it (`limits.groups[2].name`) and what is wrong with its value.
pub(super) type PlaceError = (String, String);

pub(super) fn resolve_groups(raw: &[RawGroup]) -> Result<Vec<GroupSpec>, PlaceError> {
    raw.iter()
        .enumerate()
        .map(|(i, g)| resolve_group(i, g))
        .collect()
}

pub(super) fn resolve_group(i: usize, g: &RawGroup) -> Result<GroupSpec, PlaceError> {
    let key = |k: &str| format!("limits.groups[{i}].{k}");
    if g.name.trim().is_empty() {
        return Err((key("name"), "is required".into()));
    }
    let selector = match (&g.tag, &g.assets) {
        (Some(t), None) => {
            let (column, value) = check_tag(t).map_err(|why| (key("tag"), why))?;
            GroupSelector::Tag {
                column: column.to_string(),
                value: value.to_string(),
            }
        }
        (None, Some(a)) if !a.is_empty() => {
            if let Some(j) = a.iter().position(|x| x.trim().is_empty()) {
                return Err((
                    key(&format!("assets[{j}]")),
                    "is blank; give an asset code".into(),
                ));
            }
            GroupSelector::Assets(a.clone())
        }
        _ => {
            return Err((
                key("tag"),
                "give exactly one of `tag` or a non-empty `assets` list".into(),
            ));
        }
    };
    let (min, max) = (g.min.unwrap_or(0.0), g.max.unwrap_or(1.0));
    if !(min.is_finite() && max.is_finite() && 0.0 <= min && min <= max && max <= 1.0) {
        return Err((
            key("min"),
            format!("need 0 ≤ min ≤ max ≤ 1, got min {min}, max {max}"),
        ));
    }
    Ok(GroupSpec {
        name: g.name.clone(),
        selector,
        min,
        max,
    })
}

pub(super) fn resolve_cap(c: &RawCap) -> Result<CapRule, String> {
    let rule = match (c.value, c.times_current, c.times_min) {
        (Some(v), None, None) => CapRule::Value(v),
        (None, Some(v), None) => CapRule::TimesCurrent(v),
        (None, None, Some(v)) => CapRule::TimesMin(v),
        _ => return Err("give exactly one of `value`, `times_current`, `times_min`".into()),
    };
    let (CapRule::Value(v) | CapRule::TimesCurrent(v) | CapRule::TimesMin(v)) = rule;
    if !v.is_finite()
        || (matches!(rule, CapRule::TimesMin(_)) && v < 1.0)
        || (!matches!(rule, CapRule::Value(_)) && v <= 0.0)
    {
        return Err(format!(
            "out of range: {v} (times_min must be ≥ 1, times_current > 0)"
        ));
    }
    Ok(rule)
}

pub(super) fn resolve_floor(f: &RawFloor) -> Result<FloorRule, String> {
    match (f.value, f.plus_current) {
        (Some(v), None) if v.is_finite() => Ok(FloorRule::Value(v)),
        (None, Some(v)) if v.is_finite() => Ok(FloorRule::PlusCurrent(v)),
        _ => Err("give exactly one finite `value` or `plus_current`".into()),
    }
}

pub(super) fn check_scenarios(s: &ScenarioOptions) -> Result<(), KeyError> {
    if s.horizon == 0 || s.horizon > 260 {
        return Err((
            "scenarios.horizon",
            format!("must be between 1 and 260 observations, got {}", s.horizon),
        ));
    }
    if s.step == 0 {
        return Err(("scenarios.step", "must be at least 1".into()));
    }
    if s.lookback_years == 0 || s.lookback_years > 100 {
        return Err((
            "scenarios.lookback_years",
            format!("must be between 1 and 100, got {}", s.lookback_years),
        ));
    }
    match s.half_life {
        Some(h) if !(h.is_finite() && h > 0.0) => Err((
            "scenarios.half_life",
            format!("must be a positive number of observations, got {h}"),
        )),
        _ => Ok(()),
    }
}

pub(super) fn check_signoff(s: &RawSignoff) -> Result<(), PlaceError> {
    for (i, r) in s.roles.iter().enumerate() {
        let key = |k: &str| format!("signoff.roles[{i}].{k}");
        if r.role.trim().is_empty() {
            return Err((
                key("role"),
                "is required (e.g. preparer, risk_reviewer, approver)".into(),
            ));
        }
        if r.title.as_ref().is_some_and(|t| t.trim().is_empty()) {
            return Err((
                key("title"),
                "is blank; leave it out to print the role's name".into(),
            ));
        }
        if s.roles.iter().filter(|o| o.role == r.role).count() > 1 {
            return Err((key("role"), format!("role `{}` is listed twice", r.role)));
        }
        if r.keys.is_empty() {
            return Err((
                key("keys"),
                format!(
                    "role `{}` needs at least one trusted public key (made by `tailpack keygen`)",
                    r.role
                ),
            ));
        }
        if let Some(k) = r
            .keys
            .iter()
            .find(|k| k.len() != 64 || !k.chars().all(|c| c.is_ascii_hexdigit()))
        {
            return Err((
                key("keys"),
                format!("`{k}` is not an Ed25519 public key (64 hex digits)"),
            ));
        }
    }
    Ok(())
}

pub(super) fn check_report(r: &RawReport) -> Result<(), KeyError> {
    if !TYPESET_SECONDS.contains(&r.typeset_seconds) {
        return Err((
            "report.typeset_seconds",
            format!(
                "must be between {} and {} seconds, got {}",
                TYPESET_SECONDS.start(),
                TYPESET_SECONDS.end(),
                r.typeset_seconds
            ),
        ));
    }
    if !TYPESET_MEMORY_MB.contains(&r.typeset_memory_mb) {
        return Err((
            "report.typeset_memory_mb",
            format!(
                "must be between {} and {} MB, got {}",
                TYPESET_MEMORY_MB.start(),
                TYPESET_MEMORY_MB.end(),
                r.typeset_memory_mb
            ),
        ));
    }
    Ok(())
}

pub(super) fn check_analysis(a: &AnalysisOptions, s: &RawStress) -> Result<(), KeyError> {
    if a.frontier_points < 2 || a.frontier_points > 500 {
        return Err((
            "analysis.frontier_points",
            format!("must be between 2 and 500, got {}", a.frontier_points),
        ));
    }
    if a.backtest_years > 50 {
        return Err((
            "analysis.backtest_years",
            format!("must be between 0 and 50, got {}", a.backtest_years),
        ));
    }
    if a.band_resamples > 10_000 {
        return Err((
            "analysis.band_resamples",
            format!("must be between 0 and 10000, got {}", a.band_resamples),
        ));
    }
    if let Some(b) = a.band_block
        && !(b.is_finite() && (1.0..=10_000.0).contains(&b))
    {
        return Err((
            "analysis.band_block",
            format!("must be a mean block length of 1 to 10000 observations, got {b}"),
        ));
    }
    if let Some(l) = s.loss_limit
        && !(l.is_finite() && l > 0.0 && l <= 1.0)
    {
        return Err((
            "stress.loss_limit",
            format!("must be a loss fraction in (0, 1], got {l}"),
        ));
    }
    if s.historical_windows > 20 {
        return Err((
            "stress.historical_windows",
            format!("must be between 0 and 20, got {}", s.historical_windows),
        ));
    }
    Ok(())
}

/// `scenarios.geltner_rho`: every ρ in [0, [`MAX_GELTNER_RHO`]], no blank asset code (whether each code
/// names an asset with `smoothing: geltner` is checked against the asset metadata in ingest).
pub(super) fn check_geltner(s: &ScenarioOptions) -> Result<(), PlaceError> {
    for (asset, rho) in &s.geltner_rho {
        if asset.trim().is_empty() {
            return Err((
                "scenarios.geltner_rho".into(),
                "has a blank asset code; give an asset code".into(),
            ));
        }
        if !(rho.is_finite() && (0.0..=MAX_GELTNER_RHO).contains(rho)) {
            return Err((
                format!("scenarios.geltner_rho.{asset}"),
                format!(
                    "must lie between 0 and {MAX_GELTNER_RHO}, got {rho} (unsmoothing divides returns by 1 − ρ)"
                ),
            ));
        }
    }
    Ok(())
}

pub(super) fn check_quality(q: &QualityOptions) -> Result<(), KeyError> {
    if !(q.extreme_move.is_finite() && q.extreme_move > 0.0) {
        return Err((
            "quality.extreme_move",
            format!("must be a positive return, got {}", q.extreme_move),
        ));
    }
    if !(q.autocorrelation_flag.is_finite()
        && q.autocorrelation_flag > 0.0
        && q.autocorrelation_flag < 1.0)
    {
        return Err((
            "quality.autocorrelation_flag",
            format!(
                "must lie strictly between 0 and 1, got {}",
                q.autocorrelation_flag
            ),
        ));
    }
    if q.stale_run < 2 {
        return Err((
            "quality.stale_run",
            format!("must be at least 2 observations, got {}", q.stale_run),
        ));
    }
    Ok(())
}

pub(super) fn check_levels(r: &RawRisk) -> Result<(), KeyError> {
    let open_unit = |c: f64| c.is_finite() && c > 0.0 && c < 1.0;
    if !open_unit(r.confidence) {
        return Err((
            "risk.confidence",
            format!("must lie strictly between 0 and 1, got {}", r.confidence),
        ));
    }
    if let Some(c) = r.levels.iter().find(|c| !open_unit(**c)) {
        return Err((
            "risk.levels",
            format!("every level must lie strictly between 0 and 1, got {c}"),
        ));
    }
    Ok(())
}

pub(super) fn check_limits(l: &RawLimits, has_holdings: bool) -> Result<(), KeyError> {
    if !(l.default_min.is_finite() && l.default_min >= 0.0) {
        return Err((
            "limits.default_min",
            format!("must be ≥ 0 (long-only), got {}", l.default_min),
        ));
    }
    if !(l.default_max.is_finite() && l.default_max >= l.default_min && l.default_max <= 1.0) {
        return Err((
            "limits.default_max",
            format!("must lie in [default_min, 1], got {}", l.default_max),
        ));
    }
    match l.turnover_max {
        Some(t) if !(t.is_finite() && (0.0..=2.0).contains(&t)) => Err((
            "limits.turnover_max",
            format!("must lie in [0, 2] (Σ|x − current|), got {t}"),
        )),
        Some(_) if !has_holdings => Err((
            "limits.turnover_max",
            "needs current holdings: set data.holdings".into(),
        )),
        _ => Ok(()),
    }
}

pub(super) fn check_exclude(exclude: &[String]) -> Result<(), PlaceError> {
    match exclude.iter().position(|x| x.trim().is_empty()) {
        Some(j) => Err((
            format!("limits.exclude[{j}]"),
            "is blank; give an asset code".into(),
        )),
        None => Ok(()),
    }
}

/// `data.skip_columns`: each a column name, once (ingest checks them against the price file).
pub(super) fn check_skip_columns(skip: &[String]) -> Result<(), PlaceError> {
    for (j, c) in skip.iter().enumerate() {
        if c.trim().is_empty() {
            return Err((
                format!("data.skip_columns[{j}]"),
                "is blank; give the name of a price-file column".into(),
            ));
        }
        if skip[..j].contains(c) {
            return Err((
                format!("data.skip_columns[{j}]"),
                format!("`{c}` is listed twice"),
            ));
        }
    }
    Ok(())
}

/// `fund.value` and `fund.base_currency`: both or neither; a positive finite value and an ISO 4217 code
/// (three upper-case letters; the code is not looked up, so a code reserved for testing, such as XTS,
/// serves a demo).
pub(super) fn resolve_money(f: &RawFund) -> Result<Option<Money>, KeyError> {
    match (f.value, &f.base_currency) {
        (None, None) => Ok(None),
        (Some(_), None) => Err((
            "fund.base_currency",
            "is required with fund.value (the currency of the value: an ISO 4217 code such as CHF)"
                .into(),
        )),
        (None, Some(_)) => Ok(None),
        (Some(v), Some(_)) if !(v.is_finite() && v > 0.0) => Err((
            "fund.value",
            format!("must be a positive amount in the base currency, got {v}"),
        )),
        (Some(_), Some(c)) if !(c.len() == 3 && c.chars().all(|ch| ch.is_ascii_uppercase())) => {
            Err((
                "fund.base_currency",
                format!(
                    "must be an ISO 4217 code of three upper-case letters (e.g. CHF), got `{c}`"
                ),
            ))
        }
        (Some(value), Some(c)) => Ok(Some(Money {
            value,
            currency: c.clone(),
        })),
    }
}

/// `costs.class_bps` and `costs.asset_bps`: every rate in [0, [`MAX_COST_BPS`]] basis points, no blank
/// name; returned as fractions, classes in lower case. Whether the names exist is checked against the
/// data (`models::feasible_set`).
pub(super) fn resolve_costs(c: &RawCosts) -> Result<CostRates, PlaceError> {
    let table = |key: &str, raw: &std::collections::BTreeMap<String, f64>, lower: bool| {
        raw.iter()
            .map(|(name, &bps)| {
                if name.trim().is_empty() {
                    return Err((format!("costs.{key}"), "has a blank name; give a code".into()));
                }
                if !(bps.is_finite() && (0.0..=MAX_COST_BPS).contains(&bps)) {
                    return Err((
                        format!("costs.{key}.{name}"),
                        format!(
                            "must be a one-way rate in basis points between 0 and {MAX_COST_BPS} (10 = 0.10%), got {bps}"
                        ),
                    ));
                }
                let name = if lower { name.to_ascii_lowercase() } else { name.clone() };
                Ok((name, bps / 10_000.0))
            })
            .collect::<Result<std::collections::BTreeMap<_, _>, PlaceError>>()
    };
    Ok(CostRates {
        class: table("class_bps", &c.class_bps, true)?,
        asset: table("asset_bps", &c.asset_bps, false)?,
    })
}

/// An ISO 4217 code in form: three upper-case letters (not looked up, so codes reserved for testing and
/// the user-assigned ones serve a demo).
pub fn is_currency_code(c: &str) -> bool {
    c.len() == 3 && c.chars().all(|ch| ch.is_ascii_uppercase())
}

/// `fund.base_currency` on its own (it may be given without `fund.value`: the currency prices are
/// converted into).
fn resolve_base(f: &RawFund) -> Result<Option<String>, KeyError> {
    match &f.base_currency {
        Some(c) if !is_currency_code(c) => Err((
            "fund.base_currency",
            format!("must be an ISO 4217 code of three upper-case letters (e.g. CHF), got `{c}`"),
        )),
        other => Ok(other.clone()),
    }
}

/// The `currency` section: every hedge ratio in [0, 1] under a name that is not blank (a tag written
/// `column:value`), every rate differential under a currency code and within (−1, 1). Whether the names
/// exist is checked against the data (`ingest::currency`).
pub(super) fn resolve_currency(f: &RawFund, c: &RawCurrency) -> Result<Currency, PlaceError> {
    let base = resolve_base(f).map_err(|(k, why)| (k.to_string(), why))?;
    let hedge = |key: &str, raw: &BTreeMap<String, f64>, lower: bool| {
        raw.iter()
            .map(|(name, &h)| {
                let at = format!("currency.hedge.{key}.{name}");
                if name.trim().is_empty() {
                    return Err((format!("currency.hedge.{key}"), "has a blank name; give a code".into()));
                }
                if key == "tag" {
                    check_tag(name).map_err(|why| (at.clone(), why))?;
                }
                if !(h.is_finite() && (0.0..=1.0).contains(&h)) {
                    return Err((at, format!("must be a hedge ratio between 0 (unhedged) and 1 (fully hedged), got {h}")));
                }
                let name = if lower { name.trim().to_ascii_lowercase() } else { name.trim().to_string() };
                Ok((name, h))
            })
            .collect::<Result<BTreeMap<_, _>, PlaceError>>()
    };
    Ok(Currency {
        base,
        hedge_class: hedge("class", &c.hedge.class, true)?,
        hedge_tag: hedge("tag", &c.hedge.tag, false)?,
        hedge_asset: hedge("asset", &c.hedge.asset, false)?,
        rate_differential: rate_differentials(&c.rate_differential)?,
    })
}

fn rate_differentials(raw: &BTreeMap<String, f64>) -> Result<BTreeMap<String, f64>, PlaceError> {
    for (code, &d) in raw {
        let at = format!("currency.rate_differential.{code}");
        if !is_currency_code(code) {
            return Err((
                at,
                format!("`{code}` must be an ISO 4217 code of three upper-case letters (e.g. CHF)"),
            ));
        }
        if !(d.is_finite() && d.abs() < 1.0) {
            return Err((
                at,
                format!(
                    "must be an annual rate differential as a fraction strictly between −1 and 1 (0.01 = 1% a year), got {d}"
                ),
            ));
        }
    }
    Ok(raw.clone())
}
