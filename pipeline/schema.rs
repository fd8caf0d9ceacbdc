//! Stage 10, schema: the JSON Schemas (draft 2020-12) of every JSON file a pack and the archive hold —
//! `results.json`, `manifest.json`, `signoff.json` and the archive's `index.json` — generated from Rust
//! types by `schemars`. The repository ships them in `schemas/`; the suite fails when the shipped files
//! differ from what [`all`] generates, and validates every JSON file it writes against them with an
//! independent validator.
//!
//! `results.json` and `signoff.json` are written from the types the schemas come from
//! ([`crate::pack::results::Results`], [`crate::signoff::Record`]). `manifest.json` and `index.json` are
//! written by `archive` as JSON values; [`Manifest`] and [`IndexRow`] describe them, and the suite's
//! validation of every manifest and index it writes holds the two together. Every object is closed
//! (`additionalProperties: false`) except the maps keyed by asset, class, currency, model or portfolio,
//! so a field written but not described fails validation.

use schemars::generate::SchemaSettings;
use schemars::transform::transform_subschemas;
use schemars::{JsonSchema, Schema};

/// The shipped schema files: file name (under `schemas/`) and text.
pub fn all() -> Vec<(&'static str, String)> {
    vec![
        (
            "results.schema.json",
            text::<crate::pack::results::Results>("results.json"),
        ),
        ("manifest.schema.json", text::<Manifest>("manifest.json")),
        (
            "signoff.schema.json",
            text::<crate::signoff::Record>("signoff.json"),
        ),
        ("index.schema.json", text::<Vec<IndexRow>>("index.json")),
    ]
}

/// The schema of `T` as pretty JSON text with a final newline, titled after the file it describes.
fn text<T: JsonSchema>(file: &str) -> String {
    let mut schema = SchemaSettings::draft2020_12()
        .with_transform(closed)
        .into_generator()
        .into_root_schema_for::<T>();
    schema.insert("title".into(), format!("tailpack {file}").into());
    serde_json::to_string_pretty(&schema).expect("schema serialises") + "\n"
}

/// Closes every object schema that lists its properties: a property not described is an error. Maps
/// (`additionalProperties` given as a schema, no `properties`) stay open to any key.
fn closed(schema: &mut Schema) {
    if let Some(o) = schema.as_object_mut()
        && o.contains_key("properties")
        && !o.contains_key("additionalProperties")
    {
        o.insert("additionalProperties".into(), false.into());
    }
    transform_subschemas(&mut closed, schema);
}

/// `manifest.json`: what a pack is and how it was made; written by `archive::seal`.
#[derive(JsonSchema)]
pub struct Manifest {
    /// The manifest format's version (1).
    pub manifest_version: u32,
    /// The pack id: SHA-256 (hex) of the bytes of `inputs.sha256`.
    pub pack_id: String,
    /// How the pack id is computed, in words.
    pub pack_id_rule: String,
    /// `fund.name`.
    pub fund: String,
    /// The fund's folder name in the archive.
    pub short_name: String,
    /// The as-of folder's name (YYYY-MM-DD).
    pub as_of: Option<String>,
    /// The revision number N of the folder `r<N>`.
    pub revision: u32,
    /// The inputs changed since the revision this one replaces; null for a first revision.
    pub changed_inputs: Option<Vec<String>>,
    /// The program that wrote the pack.
    pub tool: ManifestTool,
    /// The LP solver used.
    pub solver: ManifestSolver,
    /// The resolved options of the run.
    pub options: Options,
    /// Every archived input, sorted by path below `inputs/`.
    pub inputs: Vec<ManifestInput>,
    /// Every output file of the pack folder (the manifest and `signoff.json` excepted), by name.
    pub outputs: Vec<ManifestOutput>,
}

/// The program that wrote the pack.
#[derive(JsonSchema)]
pub struct ManifestTool {
    /// Always `tailpack`.
    pub name: String,
    /// The program's version.
    pub version: String,
    /// The git commit the program was built from (`unknown` outside a git checkout).
    pub git_commit: String,
}

/// The LP solver used.
#[derive(JsonSchema)]
pub struct ManifestSolver {
    /// `highs` or `clarabel`.
    pub backend: String,
    /// The solver and its settings, in words.
    pub description: String,
}

/// The resolved options of the run (the config's sections after defaults and overrides).
#[derive(JsonSchema)]
pub struct Options {
    /// The `scenarios` section.
    pub scenarios: crate::config::ScenarioOptions,
    /// The `quality` section.
    pub quality: crate::config::QualityOptions,
    /// Every confidence level reported, fractions.
    pub levels: Vec<f64>,
    /// The model confidence level, a fraction.
    pub confidence: f64,
    /// Default lower bound on each weight, a fraction of the fund's value.
    pub default_min: f64,
    /// Default upper bound on each weight, a fraction of the fund's value.
    pub default_max: f64,
    /// Asset codes excluded.
    pub exclude: Vec<String>,
    /// Group limits as configured (members chosen by tag or listed).
    pub groups: Vec<crate::config::GroupSpec>,
    /// Limit on turnover Σ|x − current|, a fraction of the fund's value; null without one.
    pub turnover_max: Option<f64>,
    /// The CVaR cap rule: a loss as a fraction of value per horizon, or a multiple of the current or
    /// least CVaR.
    pub cvar_cap: crate::config::CapRule,
    /// The return floor rule: a fraction of value per horizon, or the current portfolio's plus a margin.
    pub return_floor: crate::config::FloorRule,
    /// The `analysis` section.
    pub analysis: crate::config::AnalysisOptions,
    /// The stress loss limit, a loss as a fraction of value; null without one.
    pub stress_loss_limit: Option<f64>,
    /// How many worst historical windows the stress set takes.
    pub stress_windows: usize,
    /// The investment policy; null without one.
    pub policy: Option<crate::config::Policy>,
}

/// One archived input.
#[derive(JsonSchema)]
pub struct ManifestInput {
    /// What the file is (`config`, `prices`, `assets`, `holdings`, `template`, …).
    pub role: String,
    /// Its path in the pack (`inputs/…`).
    pub file: String,
    /// Where it was read from when the pack was made (a path on that machine); null for built-in files.
    pub source: Option<String>,
    /// SHA-256 of its bytes, hex.
    pub sha256: String,
    /// Its size in bytes.
    pub bytes: u64,
}

/// One output file of the pack.
#[derive(JsonSchema)]
pub struct ManifestOutput {
    /// Its name in the pack folder.
    pub file: String,
    /// SHA-256 of its bytes, hex.
    pub sha256: String,
    /// Its size in bytes.
    pub bytes: u64,
}

/// One pack of the archive's `index.json` (an array of these, by fund, as-of and revision); written by
/// `archive::write_index`.
#[derive(JsonSchema)]
pub struct IndexRow {
    /// The fund's folder name.
    pub fund: Option<String>,
    /// The as-of folder's name (YYYY-MM-DD).
    pub as_of: Option<String>,
    /// The revision number N of the folder `r<N>`.
    pub revision: u32,
    /// The pack id as its manifest records it; null when the manifest cannot be read.
    pub pack_id: Option<String>,
    /// `draft`, `signing` or `final`.
    pub status: String,
    /// `role:name` of every signature, in signing order.
    pub signers: Vec<String>,
    /// The final PDF's SHA-256, hex; null until final.
    pub final_pdf_sha256: Option<String>,
    /// SHA-256 of the pack's `manifest.json`, hex.
    pub manifest_sha256: String,
    /// The pack folder relative to the archive root (`<fund>/<as-of>/r<N>`).
    pub path: String,
}
