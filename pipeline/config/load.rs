//! Loading: a config file into one resolved [`Config`] per fund (a multi-fund config's `funds:` entries
//! each override the shared settings), and a pack's archived config re-pointed at the archived inputs.

use super::inputs::{self, Input, mandate_slot, raw_slot};
use super::raw::{RawConfig, RawMandate};
use super::read::{parse, read_yaml};
use super::resolve::{Context, resolve_at};
use super::stress::{StressFile, load_stress};
use super::{Config, Overrides, yaml};
use crate::error::{Error, Result};
use std::cell::OnceCell;
use std::path::Path;

/// Reads and validates a single-fund config file.
pub fn load(path: &Path, overrides: &Overrides) -> Result<Config> {
    let mut all = load_all(path, overrides)?;
    if all.len() > 1 {
        return Err(Error::config(
            path,
            format!(
                "lists {} funds; this command takes a single-fund config",
                all.len()
            ),
        ));
    }
    Ok(all.remove(0))
}

/// Reads a config and resolves one [`Config`] per fund (one for a single-fund config), with the shocks of
/// its stress file and the command-line overrides.
pub fn load_all(path: &Path, overrides: &Overrides) -> Result<Vec<Config>> {
    let text = read_yaml(path, "config")?;
    let raw = parse(path, &text)?;
    expand(path, &text, raw, overrides, None)
}

/// One resolved config per fund; `archive` is the `inputs/` folder of an archived config.
fn expand(
    path: &Path,
    text: &str,
    mut raw: RawConfig,
    overrides: &Overrides,
    archive: Option<&Path>,
) -> Result<Vec<Config>> {
    let mandates = std::mem::take(&mut raw.funds);
    let stress = OnceCell::new();
    let read_stress = |p: &Path| -> Result<StressFile> {
        if let Some(s) = stress.get() {
            return Ok(StressFile::clone(s));
        }
        let s = load_stress(p)?;
        Ok(stress.get_or_init(|| s).clone())
    };
    let one = |fund: Option<usize>, raw: RawConfig| {
        let line = |key: &str| line_of(text, fund, key);
        let cx = Context {
            path,
            overrides,
            line: &line,
            stress: &read_stress,
            archive,
        };
        in_fund(path, fund, resolve_at(&cx, raw))
    };
    let configs: Vec<Config> = if mandates.is_empty() {
        vec![one(None, raw)?]
    } else {
        mandates
            .iter()
            .enumerate()
            .map(|(i, m)| one(Some(i), mandate(&raw, m)))
            .collect::<Result<_>>()?
    };
    distinct_short_names(path, &configs)?;
    Ok(configs)
}

fn distinct_short_names(path: &Path, configs: &[Config]) -> Result<()> {
    for (i, c) in configs.iter().enumerate() {
        if configs[..i].iter().any(|o| o.short_name == c.short_name) {
            return Err(Error::config(
                path,
                format!(
                    "funds[{i}]: short name `{}` is used twice; give each fund its own fund.short_name",
                    c.short_name
                ),
            ));
        }
    }
    Ok(())
}

/// The shared settings with one mandate's overrides (`raw` holds no `funds` any more).
fn mandate(raw: &RawConfig, m: &RawMandate) -> RawConfig {
    let mut one = raw.clone();
    let mut m = m.clone();
    one.fund = m.fund.clone();
    for &kind in Input::ALL {
        if let (Some(Some(own)), Some(shared)) =
            (mandate_slot(kind, &mut m), raw_slot(kind, &mut one))
        {
            *shared = Some(own.clone());
        }
    }
    if let Some(l) = &m.limits {
        one.limits = l.clone();
    }
    if let Some(mo) = &m.models {
        one.models = mo.clone();
    }
    if let Some(po) = &m.policy {
        one.policy = Some(po.clone());
    }
    if let Some(co) = &m.costs {
        one.costs = co.clone();
    }
    if let Some(so) = &m.signoff {
        one.signoff = so.clone();
    }
    one
}

/// For fund `i` of a multi-fund config, messages about the config file start with `funds[i]`.
fn in_fund(path: &Path, fund: Option<usize>, resolved: Result<Config>) -> Result<Config> {
    match fund {
        None => resolved,
        Some(i) => resolved.map_err(|e| match e {
            Error::Config { path: p, message } if p == path => Error::Config {
                path: p,
                message: format!("funds[{i}]: {message}"),
            },
            other => other,
        }),
    }
}

/// The line of `key` in the config text: for fund `i` of a multi-fund config, the line of its own
/// override where it has one, else of the shared setting; exact where the key is written, else the line
/// of the longest part of it that is (the `fund` section for a missing `fund.name`).
fn line_of(text: &str, fund: Option<usize>, key: &str) -> Option<usize> {
    let mut candidates = Vec::new();
    if let Some(i) = fund {
        candidates.push((format!("funds[{i}].{key}"), 3));
        if let Some(k) = key.strip_prefix("data.") {
            candidates.push((format!("funds[{i}].{k}"), 3));
        }
    }
    candidates.push((key.to_string(), 1));
    let places: Vec<yaml::Place> = candidates
        .iter()
        .filter_map(|(k, least)| yaml::locate(text, k).filter(|p| p.matched >= *least))
        .collect();
    places
        .iter()
        .find(|p| p.exact)
        .or_else(|| places.iter().max_by_key(|p| p.matched))
        .map(|p| p.line)
}

/// One fund of a (possibly multi-fund) config, by short name.
pub fn load_fund(path: &Path, short_name: Option<&str>, overrides: &Overrides) -> Result<Config> {
    let all = load_all(path, overrides)?;
    pick(path, all, short_name)
}

fn pick(path: &Path, all: Vec<Config>, short_name: Option<&str>) -> Result<Config> {
    match short_name {
        None if all.len() == 1 => Ok(all.into_iter().next().expect("one")),
        None => Err(Error::config(
            path,
            "lists several funds; name one".to_string(),
        )),
        Some(n) => all
            .into_iter()
            .find(|c| c.short_name == n)
            .ok_or_else(|| Error::config(path, format!("has no fund `{n}`"))),
    }
}

/// Loads the config archived in a pack's `inputs/` folder, reading every input it names from its archived
/// copy ([`Input::find_archived`]) instead of the original path, for the fund, as-of date and backend of
/// the archived run record; `overrides` may still set the output root.
pub fn load_archived(inputs: &Path, overrides: &Overrides) -> Result<Config> {
    let path = inputs.join(inputs::CONFIG_COPY);
    let text = read_yaml(&path, "config")?;
    let raw = parse(&path, &text)?;
    let run = inputs::recorded(inputs);
    let overrides = Overrides {
        as_of: overrides.as_of.or(run.as_of),
        backend: overrides.backend.or(run.backend),
        out: overrides.out.clone(),
    };
    let all = expand(&path, &text, raw, &overrides, Some(inputs))?;
    match run.fund {
        Some(n) => pick(&path, all, Some(&n)),
        None => all
            .into_iter()
            .next()
            .ok_or_else(|| Error::config(&path, "lists no fund")),
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::config::Backend;
    use std::path::PathBuf;

    fn demo() -> PathBuf {
        Path::new(env!("CARGO_MANIFEST_DIR")).join("config-demo/fund.yaml")
    }

    /// The demo config says `solver.backend: highs` and `output.root: ../out`; each override replaces
    /// its setting in the loaded config, and nothing else.
    #[test]
    fn overrides_replace_the_configs_settings_as_it_is_loaded() {
        let plain = load(&demo(), &Overrides::default()).unwrap();
        assert_eq!(plain.backend, Backend::Highs);
        assert_eq!(plain.out_root, demo().parent().unwrap().join("../out"));
        assert_eq!(plain.as_of, None);
        let as_of = chrono::NaiveDate::from_ymd_opt(2026, 6, 30);
        let given = Overrides {
            as_of,
            out: Some(PathBuf::from("elsewhere")),
            backend: Some(Backend::Clarabel),
        };
        let c = load(&demo(), &given).unwrap();
        assert_eq!(c.backend, Backend::Clarabel);
        assert_eq!(c.out_root, PathBuf::from("elsewhere"));
        assert_eq!(c.as_of, as_of);
        assert_eq!(c.prices, plain.prices);
    }

    /// Without `output.root` or `--out`, packs go to `out/` in the current folder (README, "The pack
    /// folder").
    #[test]
    fn the_default_pack_root_is_the_one_the_readme_states() {
        let data = demo().parent().unwrap().join("data");
        let text = format!(
            "fund: {{ name: A fund (fictional) }}\ndata: {{ prices: {}, assets: {} }}\nmodels:\n  max_return: {{ cvar_cap: {{ times_min: 1.5 }} }}\n  min_cvar: {{ return_floor: {{ value: 0.0 }} }}\n",
            data.join("prices.csv").display(),
            data.join("assets.csv").display()
        );
        let path = Path::new("fund.yaml");
        let c = crate::config::resolve(path, parse(path, &text).unwrap()).unwrap();
        assert_eq!(c.out_root, PathBuf::from("out"));
        let readme =
            std::fs::read_to_string(Path::new(env!("CARGO_MANIFEST_DIR")).join("README.md"))
                .unwrap();
        assert!(readme.contains("(default root `out/` in the current"));
    }
}
