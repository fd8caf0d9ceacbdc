//! The policy section of the config (`policy`): each line's members, target, permitted range and benchmark
//! series, checked for shape and range here. Whether the members and the series exist is a question for
//! the data: the members are resolved against the asset list with the group limits (`models::feasible`),
//! the series against the price file in `ingest`.

use super::checks::PlaceError;
use super::raw::{RawPolicy, RawPolicyLine};
use super::stress::check_tag;
use super::{GroupSelector, Policy, PolicyLine};

/// The policy targets must sum to 1 within this tolerance (stated in README, as for holdings).
pub const TARGET_TOLERANCE: f64 = 1e-4;

/// The resolved policy: every line checked, names unique, targets summing to 1.
pub(super) fn resolve_policy(raw: &RawPolicy) -> Result<Policy, PlaceError> {
    let active_cvar_budget = active_cvar_budget(raw)?;
    if raw.lines.is_empty() {
        return Err((
            "policy.lines".into(),
            "give at least one line (name, members, target, min, max, benchmark), or leave the policy section out".into(),
        ));
    }
    let lines = raw
        .lines
        .iter()
        .enumerate()
        .map(|(i, l)| resolve_line(i, l))
        .collect::<Result<Vec<_>, _>>()?;
    unique_names(&lines)?;
    targets_sum_to_one(&lines)?;
    Ok(Policy {
        lines,
        ranges_as_limits: raw.ranges_as_limits,
        active_cvar_budget,
    })
}

/// `policy.active_cvar_budget`: a finite fraction of value ≥ 0, and only with a policy benchmark to be
/// active against (the lines, each naming its benchmark series).
fn active_cvar_budget(raw: &RawPolicy) -> Result<Option<f64>, PlaceError> {
    let key = "policy.active_cvar_budget";
    let Some(b) = raw.active_cvar_budget else {
        return Ok(None);
    };
    if !(b.is_finite() && b >= 0.0) {
        return Err((
            key.into(),
            format!(
                "must be a finite fraction of the fund's value ≥ 0 (the largest active CVaR against the policy benchmark), got {b}"
            ),
        ));
    }
    if raw.lines.is_empty() {
        return Err((
            key.into(),
            "limits active risk against the policy benchmark, but the policy has no lines: give policy.lines, each with its benchmark series, or leave the budget out".into(),
        ));
    }
    Ok(Some(b))
}

fn resolve_line(i: usize, l: &RawPolicyLine) -> Result<PolicyLine, PlaceError> {
    let key = |k: &str| format!("policy.lines[{i}].{k}");
    if l.name.trim().is_empty() {
        return Err((
            key("name"),
            "is required (the line's name in the pack)".into(),
        ));
    }
    let selector = members(i, l)?;
    let need = |v: Option<f64>, k: &str| -> Result<f64, PlaceError> {
        match v {
            Some(x) if x.is_finite() => Ok(x),
            Some(x) => Err((key(k), format!("must be a finite weight, got {x}"))),
            None => Err((key(k), format!("is required (line `{}`)", l.name))),
        }
    };
    let (target, min, max) = (
        need(l.target, "target")?,
        need(l.min, "min")?,
        need(l.max, "max")?,
    );
    if !(0.0 <= min && min <= target && target <= max && max <= 1.0) {
        return Err((
            key("target"),
            format!(
                "line `{}`: need 0 ≤ min ≤ target ≤ max ≤ 1, got min {min}, target {target}, max {max}",
                l.name
            ),
        ));
    }
    let benchmark = match &l.benchmark {
        Some(b) if !b.trim().is_empty() => b.clone(),
        Some(_) => {
            return Err((
                key("benchmark"),
                "is blank; name a price-file series".into(),
            ));
        }
        None => {
            return Err((
                key("benchmark"),
                format!(
                    "is required (line `{}`): the price-file series that measures the line, an asset or a series without a metadata row",
                    l.name
                ),
            ));
        }
    };
    Ok(PolicyLine {
        name: l.name.clone(),
        selector,
        target,
        min,
        max,
        benchmark,
    })
}

/// Exactly one of `class`, `tag` or a non-empty `assets` list, without blanks.
fn members(i: usize, l: &RawPolicyLine) -> Result<GroupSelector, PlaceError> {
    let key = |k: &str| format!("policy.lines[{i}].{k}");
    match (&l.class, &l.tag, &l.assets) {
        (Some(c), None, None) if !c.trim().is_empty() => Ok(GroupSelector::Tag {
            column: "class".into(),
            value: c.trim().to_string(),
        }),
        (Some(_), None, None) => Err((key("class"), "is blank; give an asset class".into())),
        (None, Some(t), None) => {
            let (column, value) = check_tag(t).map_err(|why| (key("tag"), why))?;
            Ok(GroupSelector::Tag {
                column: column.to_string(),
                value: value.to_string(),
            })
        }
        (None, None, Some(a)) if !a.is_empty() => {
            if let Some(j) = a.iter().position(|x| x.trim().is_empty()) {
                return Err((
                    key(&format!("assets[{j}]")),
                    "is blank; give an asset code".into(),
                ));
            }
            Ok(GroupSelector::Assets(a.clone()))
        }
        _ => Err((
            key("class"),
            format!(
                "line `{}`: give exactly one of `class`, `tag` or a non-empty `assets` list",
                l.name
            ),
        )),
    }
}

fn unique_names(lines: &[PolicyLine]) -> Result<(), PlaceError> {
    for (i, l) in lines.iter().enumerate() {
        if lines[..i].iter().any(|o| o.name == l.name) {
            return Err((
                format!("policy.lines[{i}].name"),
                format!("line `{}` is listed twice", l.name),
            ));
        }
    }
    Ok(())
}

fn targets_sum_to_one(lines: &[PolicyLine]) -> Result<(), PlaceError> {
    let total: f64 = lines.iter().map(|l| l.target).sum();
    if (total - 1.0).abs() <= TARGET_TOLERANCE {
        return Ok(());
    }
    let each: Vec<String> = lines
        .iter()
        .map(|l| format!("{} {}", l.name, l.target))
        .collect();
    Err((
        "policy.lines".into(),
        format!(
            "the targets sum to {total:.4}, not 1 (tolerance {TARGET_TOLERANCE:e}): {}",
            each.join(", ")
        ),
    ))
}
