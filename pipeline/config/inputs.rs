//! The input files of a run, declared once: each kind's role, config key, archived name and form. Config
//! resolution checks them from here, `archive::plan` archives and hashes them (so they reach the pack id,
//! `inputs.sha256`, the manifest and results.json's `inputs`), and [`super::load_archived`] re-points a
//! config at the archived copies for `verify --rerun` and `finalize`.
//!
//! Adding an input file: a variant of [`Input`] (the compiler then asks for its role, key, archived name
//! and form here, its place in the raw config in [`raw_slot`], its resolved path in
//! [`super::Config::input`] and how the archive reads it in `archive::plan`), the key in the raw config
//! and the reader of its contents (ingest for data files, config for the stress file).

use super::Config;
use super::raw::{Backend, RawConfig, RawMandate};
use chrono::NaiveDate;
use std::path::{Path, PathBuf};

macro_rules! inputs {
    ($($(#[$doc:meta])* $kind:ident),* $(,)?) => {
        /// One kind of input file.
        #[derive(Debug, Clone, Copy, PartialEq, Eq, PartialOrd, Ord, Hash)]
        pub enum Input {
            $($(#[$doc])* $kind),*
        }

        impl Input {
            /// Every kind, in the order resolution checks them and the archive reads them.
            pub const ALL: &[Input] = &[$(Input::$kind),*];
        }
    };
}

inputs! {
    /// The config file itself (the command's argument).
    Config,
    /// The price history (`data.prices`), read by `ingest`.
    Prices,
    /// The asset metadata (`data.assets`), read by `ingest`.
    Assets,
    /// The current holdings (`data.holdings`, or a fund's own `funds[].holdings`), read by `ingest`.
    Holdings,
    /// The exchange rates (`data.fx`): per date, the value of one unit of each currency in the base
    /// currency; read by `ingest::currency`.
    Fx,
    /// The named stress shocks (`stress.file`), read and checked by `config::stress` when the config is
    /// loaded.
    Stress,
    /// The custom template folder (`report.templates`), listed by `report::templates::custom`; the archive
    /// holds the effective templates (built-in ones not replaced, plus the folder's files) even without it.
    Templates,
    /// The scenario file (`data.scenarios`): joint scenarios from outside (an economic scenario generator,
    /// a Monte Carlo engine) used instead of the price history's; read by `ingest::scenario_file`.
    Scenarios,
    /// The run's own record (`run.json`: as-of, backend, fund, tool), written by `archive::plan` and read
    /// back by [`super::load_archived`].
    Run,
}

/// The archived name of the config ([`Input::Config`]).
pub const CONFIG_COPY: &str = "config.yaml";
/// The archived name of the run record ([`Input::Run`]).
pub const RUN_RECORD: &str = "run.json";

/// What an input is on disk.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Form {
    /// A regular file named by the config (or, for the config, by the command line).
    File,
    /// A folder named by the config; the archive holds its listed files under the archived name.
    Folder,
    /// Written by the run itself; no config key.
    Generated,
}

/// How an input is named under a pack's `inputs/`.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Archived {
    /// Always this name.
    Named(&'static str),
    /// The role followed by the source file's extension (`prices.csv`, `prices.parquet`).
    RoleAndExtension,
    /// A folder of this name.
    Folder(&'static str),
}

impl Input {
    /// The role, as results.json and the manifest list it (every archived template file has role
    /// `template`).
    pub const fn role(self) -> &'static str {
        match self {
            Input::Config => "config",
            Input::Prices => "prices",
            Input::Assets => "assets",
            Input::Holdings => "holdings",
            Input::Fx => "fx",
            Input::Stress => "stress",
            Input::Templates => "template",
            Input::Scenarios => "scenarios",
            Input::Run => "run",
        }
    }

    /// The config key that names it (none for the config itself and the run record).
    pub const fn key(self) -> Option<&'static str> {
        match self {
            Input::Config | Input::Run => None,
            Input::Prices => Some("data.prices"),
            Input::Assets => Some("data.assets"),
            Input::Holdings => Some("data.holdings"),
            Input::Fx => Some("data.fx"),
            Input::Stress => Some("stress.file"),
            Input::Templates => Some("report.templates"),
            Input::Scenarios => Some("data.scenarios"),
        }
    }

    /// For a required input, what it is, as the "is required" message says.
    pub const fn required(self) -> Option<&'static str> {
        match self {
            Input::Prices => Some("the price file"),
            Input::Assets => Some("the asset metadata file"),
            Input::Config
            | Input::Holdings
            | Input::Fx
            | Input::Stress
            | Input::Templates
            | Input::Scenarios
            | Input::Run => None,
        }
    }

    /// What it is on disk.
    pub const fn form(self) -> Form {
        match self {
            Input::Config
            | Input::Prices
            | Input::Assets
            | Input::Holdings
            | Input::Fx
            | Input::Stress
            | Input::Scenarios => Form::File,
            Input::Templates => Form::Folder,
            Input::Run => Form::Generated,
        }
    }

    /// How it is named under `inputs/`.
    pub const fn archived(self) -> Archived {
        match self {
            Input::Config => Archived::Named(CONFIG_COPY),
            Input::Prices | Input::Assets | Input::Holdings | Input::Fx | Input::Scenarios => {
                Archived::RoleAndExtension
            }
            Input::Stress => Archived::Named("stress.yaml"),
            Input::Templates => Archived::Folder("templates"),
            Input::Run => Archived::Named(RUN_RECORD),
        }
    }

    /// Whether the archive holds it even when the config does not name it (the effective templates, the
    /// run record).
    pub const fn always_archived(self) -> bool {
        matches!(self, Input::Config | Input::Templates | Input::Run)
    }

    /// The name below `inputs/` of a file input read from `source` (the folder's name for a folder).
    pub fn archived_name(self, source: &Path) -> String {
        match self.archived() {
            Archived::Named(n) | Archived::Folder(n) => n.to_string(),
            Archived::RoleAndExtension => {
                let ext = source
                    .extension()
                    .and_then(|e| e.to_str())
                    .map(|e| format!(".{e}"))
                    .unwrap_or_default();
                format!("{}{ext}", self.role())
            }
        }
    }

    /// The archived copy of this input in a pack's `inputs/` folder, if the pack holds one: for a
    /// role-and-extension name the first such file in sorted order.
    pub fn find_archived(self, inputs: &Path) -> Option<PathBuf> {
        match self.archived() {
            Archived::Named(n) => inputs.join(n).is_file().then(|| PathBuf::from(n)),
            Archived::Folder(n) => inputs.join(n).is_dir().then(|| PathBuf::from(n)),
            Archived::RoleAndExtension => {
                let prefix = format!("{}.", self.role());
                let mut names: Vec<String> = std::fs::read_dir(inputs)
                    .ok()?
                    .filter_map(|e| e.ok())
                    .map(|e| e.file_name().to_string_lossy().into_owned())
                    .filter(|n| n.starts_with(&prefix))
                    .collect();
                names.sort();
                names.into_iter().next().map(PathBuf::from)
            }
        }
    }

    /// Why `path` cannot be this input (not a regular file, not a folder), if it cannot.
    pub fn unusable(self, path: &Path) -> Option<String> {
        match self.form() {
            Form::File => crate::error::fs::not_a_file(path).map(|why| {
                format!(
                    "{} {why} (paths are relative to the config file's folder)",
                    path.display()
                )
            }),
            Form::Folder if !path.is_dir() => {
                let what = match std::fs::metadata(path) {
                    Ok(m) => format!("it is {}", crate::error::fs::kind_of(&m)),
                    Err(_) => "it does not exist".to_string(),
                };
                Some(format!(
                    "{} is not a folder ({what}; custom templates go in a folder whose files replace the built-in ones)",
                    path.display()
                ))
            }
            Form::Folder | Form::Generated => None,
        }
    }
}

/// Where the raw config names this input (the fund's shared setting).
pub fn raw_slot(kind: Input, raw: &mut RawConfig) -> Option<&mut Option<PathBuf>> {
    match kind {
        Input::Config | Input::Run => None,
        Input::Prices => Some(&mut raw.data.prices),
        Input::Assets => Some(&mut raw.data.assets),
        Input::Holdings => Some(&mut raw.data.holdings),
        Input::Fx => Some(&mut raw.data.fx),
        Input::Stress => Some(&mut raw.stress.file),
        Input::Templates => Some(&mut raw.report.templates),
        Input::Scenarios => Some(&mut raw.data.scenarios),
    }
}

/// Where one fund of a multi-fund config names its own copy of this input, for inputs a fund may
/// override.
pub fn mandate_slot(kind: Input, m: &mut RawMandate) -> Option<&mut Option<PathBuf>> {
    match kind {
        Input::Holdings => Some(&mut m.holdings),
        Input::Config
        | Input::Prices
        | Input::Assets
        | Input::Fx
        | Input::Stress
        | Input::Templates
        | Input::Scenarios
        | Input::Run => None,
    }
}

/// The last part of a key: the name under which `config::yaml` bounds a path value.
pub fn leaf(key: &str) -> &str {
    key.rsplit('.').next().unwrap_or(key)
}

/// The run record (`run.json`, [`Input::Run`]): what a run was asked for besides the config. Written by
/// `archive::plan`, read back by [`super::load_archived`].
#[derive(Debug, Clone, serde::Serialize)]
pub struct RunRecord {
    pub as_of: NaiveDate,
    pub backend: Backend,
    /// The fund's short name.
    pub fund: String,
    /// `tailpack` and its version.
    pub tool: String,
}

impl RunRecord {
    /// The record of a run of `cfg` at `as_of`.
    pub fn of(cfg: &Config, as_of: NaiveDate) -> RunRecord {
        RunRecord {
            as_of,
            backend: cfg.backend,
            fund: cfg.short_name.clone(),
            tool: format!("tailpack {}", env!("CARGO_PKG_VERSION")),
        }
    }

    /// The bytes archived as `run.json`.
    pub fn bytes(&self) -> Vec<u8> {
        (serde_json::to_string_pretty(self).expect("json") + "\n").into_bytes()
    }
}

/// What an archived run record says, each part read leniently: the pack's digests vouch for the bytes,
/// and a part that cannot be read leaves the config's own setting.
#[derive(Debug, Clone, Default)]
pub struct Recorded {
    pub as_of: Option<NaiveDate>,
    pub backend: Option<Backend>,
    pub fund: Option<String>,
}

/// Reads the run record in a pack's `inputs/` folder.
pub fn recorded(inputs: &Path) -> Recorded {
    let run: serde_json::Value = std::fs::read(inputs.join(RUN_RECORD))
        .ok()
        .and_then(|b| serde_json::from_slice(&b).ok())
        .unwrap_or_default();
    Recorded {
        as_of: run["as_of"].as_str().and_then(|d| d.parse().ok()),
        backend: run["backend"].as_str().and_then(|b| b.parse().ok()),
        fund: run["fund"].as_str().map(str::to_string),
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn roles_keys_and_archived_names_are_distinct() {
        for (i, a) in Input::ALL.iter().enumerate() {
            for b in &Input::ALL[i + 1..] {
                assert_ne!(a.role(), b.role());
                assert!(a.key().is_none() || a.key() != b.key(), "{a:?} {b:?}");
                let src = Path::new("data/x.csv");
                let (na, nb) = (a.archived_name(src), b.archived_name(src));
                assert_ne!(na, nb, "{a:?} {b:?}");
                // `find_archived` looks a role-and-extension name up by `<role>.`: no other may match.
                for (k, other) in [(a, &nb), (b, &na)] {
                    if k.archived() == Archived::RoleAndExtension {
                        assert!(!other.starts_with(&format!("{}.", k.role())), "{other}");
                    }
                }
            }
        }
    }

    #[test]
    fn the_key_of_every_kind_is_where_its_raw_slot_reads() {
        for &k in Input::ALL {
            let Some(key) = k.key() else {
                assert!(raw_slot(k, &mut RawConfig::default()).is_none(), "{k:?}");
                continue;
            };
            let (section, name) = key.split_once('.').expect("section.key");
            let text = format!("{section}:\n  {name}: some/where\n");
            let mut raw: RawConfig = serde_yaml_ng::from_str(&text).expect(&text);
            let slot = raw_slot(k, &mut raw).expect("a slot");
            assert_eq!(slot.as_deref(), Some(Path::new("some/where")), "{k:?}");
        }
    }

    #[test]
    fn archived_names_keep_the_extension_where_they_should() {
        let p = Path::new("data/p.parquet");
        assert_eq!(Input::Prices.archived_name(p), "prices.parquet");
        assert_eq!(Input::Holdings.archived_name(Path::new("h")), "holdings");
        assert_eq!(
            Input::Stress.archived_name(Path::new("s.yml")),
            "stress.yaml"
        );
    }
}
