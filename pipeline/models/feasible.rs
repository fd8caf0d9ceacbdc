//! The feasible set X from the config: per-asset bounds from the asset metadata (or the config's
//! defaults), exclusions, group limits resolved against the assets (by a metadata tag or by name) and the
//! turnover limit around the current holdings, and the policy ranges as group limits when
//! `policy.ranges_as_limits` is on (a portfolio outside the policy is then not a candidate). Every model
//! family and the backtest share this one X. The transaction cost rate of each asset travels with it (not
//! a constraint: the models' returns are net of the cost of moving from the current holdings).
//!
//! Reads the resolved config and the loaded data (earlier stages); the only place group selectors meet the
//! asset list, so an unknown asset or tag column is a config error named here (exit 2).

use super::{FeasibleSet, Group};
use crate::config::{self, Config, GroupSelector};
use crate::error::{Error, Result};
use crate::ingest::MarketData;

/// Builds the feasible set X from config, metadata and holdings.
pub fn feasible_set(cfg: &Config, data: &MarketData) -> Result<FeasibleSet> {
    let n = data.assets.len();
    let mut lower: Vec<f64> = data
        .meta
        .iter()
        .map(|m| m.min_weight.unwrap_or(cfg.default_min))
        .collect();
    let mut upper: Vec<f64> = data
        .meta
        .iter()
        .map(|m| m.max_weight.unwrap_or(cfg.default_max))
        .collect();
    for (i, a) in data.assets.iter().enumerate() {
        if cfg.exclude.contains(a) {
            lower[i] = 0.0;
            upper[i] = 0.0;
        }
    }
    let mut groups = cfg
        .groups
        .iter()
        .map(|g| resolve_group(cfg, data, g))
        .collect::<Result<Vec<_>>>()?;
    if let Some(p) = cfg.policy.as_ref().filter(|p| p.ranges_as_limits) {
        groups.extend(
            policy_lines(cfg, data)?
                .into_iter()
                .zip(&p.lines)
                .map(|(members, l)| Group {
                    name: format!("policy: {}", l.name),
                    members,
                    min: l.min,
                    max: l.max,
                }),
        );
    }
    debug_assert_eq!(lower.len(), n);
    Ok(FeasibleSet {
        lower,
        upper,
        groups,
        turnover_max: cfg.turnover_max,
        current: data.holdings.clone(),
        cost_rates: cost_rates(cfg, data)?,
    })
}

/// The members of every policy line (asset indices), in line order; empty without a policy. A line that
/// selects no asset, an unknown asset or tag column is a config error naming the line.
pub fn policy_lines(cfg: &Config, data: &MarketData) -> Result<Vec<Vec<usize>>> {
    let Some(p) = &cfg.policy else {
        return Ok(vec![]);
    };
    p.lines
        .iter()
        .map(|l| {
            members(
                cfg,
                data,
                &format!("policy.lines `{}`", l.name),
                &l.selector,
            )
        })
        .collect()
}

/// Each asset's one-way cost rate ([`config::CostRates::rate`]); a class or asset the config names but
/// the data does not have is a config error (a misspelt name would otherwise trade free).
fn cost_rates(cfg: &Config, data: &MarketData) -> Result<Vec<f64>> {
    let names: Vec<&str> = data.assets.iter().map(String::as_str).collect();
    known_names(
        cfg,
        cfg.costs.asset.keys(),
        &names,
        "costs.asset_bps: unknown asset",
    )?;
    let classes: Vec<&str> = data.meta.iter().map(|m| m.class.as_str()).collect();
    known_names(
        cfg,
        cfg.costs.class.keys(),
        &classes,
        "costs.class_bps: no asset has class",
    )?;
    Ok(data
        .assets
        .iter()
        .zip(&data.meta)
        .map(|(a, m)| cfg.costs.rate(a, &m.class))
        .collect())
}

/// The first of `wanted` that is not among `known`, as a config error `{what} `name``, with the nearest
/// known name as a hint.
fn known_names<'a>(
    cfg: &Config,
    mut wanted: impl Iterator<Item = &'a String>,
    known: &[&str],
    what: &str,
) -> Result<()> {
    let Some(a) = wanted.find(|a| !known.contains(&a.as_str())) else {
        return Ok(());
    };
    let hint = config::nearest(a, known)
        .map(|n| format!("; did you mean `{n}`?"))
        .unwrap_or_default();
    Err(Error::config(&cfg.path, format!("{what} `{a}`{hint}")))
}

fn resolve_group(cfg: &Config, data: &MarketData, g: &config::GroupSpec) -> Result<Group> {
    let label = format!("limits.groups `{}`", g.name);
    Ok(Group {
        name: g.name.clone(),
        members: members(cfg, data, &label, &g.selector)?,
        min: g.min,
        max: g.max,
    })
}

/// The assets a selector picks; `label` (`limits.groups `Equity``) starts every message.
fn members(
    cfg: &Config,
    data: &MarketData,
    label: &str,
    selector: &GroupSelector,
) -> Result<Vec<usize>> {
    let members: Vec<usize> = match selector {
        GroupSelector::Tag { column, value } => {
            let col = column.to_ascii_lowercase();
            if data.meta.first().is_some_and(|m| m.tag(&col).is_none()) {
                return Err(Error::config(
                    &cfg.path,
                    format!("{label}: the asset metadata has no column `{column}`"),
                ));
            }
            (0..data.assets.len())
                .filter(|&i| {
                    data.meta[i]
                        .tag(&col)
                        .is_some_and(|v| v.eq_ignore_ascii_case(value))
                })
                .collect()
        }
        GroupSelector::Assets(list) => list
            .iter()
            .map(|a| {
                data.assets.iter().position(|x| x == a).ok_or_else(|| {
                    let names: Vec<&str> = data.assets.iter().map(String::as_str).collect();
                    let hint = config::nearest(a, &names)
                        .map(|n| format!("; did you mean `{n}`?"))
                        .unwrap_or_default();
                    Error::config(&cfg.path, format!("{label}: unknown asset `{a}`{hint}"))
                })
            })
            .collect::<Result<_>>()?,
    };
    if members.is_empty() {
        return Err(Error::config(
            &cfg.path,
            format!("{label}: selects no asset"),
        ));
    }
    Ok(members)
}
