//! The template files: the defaults embedded from `templates/` at build time, overridden file by file by a
//! custom folder (`report.templates`), and the shipped fonts.
//!
//! A custom folder may hold any of the default names (it replaces that file), new files that a custom
//! partial imports (e.g. a logo), and `.ttf`/`.otf` fonts, which are registered with the typesetter.

use super::world::{Origin, WorldFile};
use crate::error::{Result, fs};
use std::path::Path;

/// The default templates, by file name: `main.typ` includes the others in print order.
pub const DEFAULTS: &[(&str, &str)] = &[
    ("main.typ", include_str!("../../templates/main.typ")),
    ("style.typ", include_str!("../../templates/style.typ")),
    ("cover.typ", include_str!("../../templates/cover.typ")),
    ("contents.typ", include_str!("../../templates/contents.typ")),
    ("summary.typ", include_str!("../../templates/summary.typ")),
    (
        "allocations.typ",
        include_str!("../../templates/allocations.typ"),
    ),
    (
        "tail-loss.typ",
        include_str!("../../templates/tail-loss.typ"),
    ),
    ("analysis.typ", include_str!("../../templates/analysis.typ")),
    ("checks.typ", include_str!("../../templates/checks.typ")),
    ("caveats.typ", include_str!("../../templates/caveats.typ")),
    ("method.typ", include_str!("../../templates/method.typ")),
    ("data.typ", include_str!("../../templates/data.typ")),
    ("signoff.typ", include_str!("../../templates/signoff.typ")),
    ("cautions.typ", include_str!("../../templates/cautions.typ")),
];

/// The shipped sans family (Inter, SIL Open Font License 1.1; see `templates/fonts/LICENSE-Inter.txt`).
pub const FONTS: [&[u8]; 4] = [
    include_bytes!("../../templates/fonts/Inter-Regular.otf"),
    include_bytes!("../../templates/fonts/Inter-Italic.otf"),
    include_bytes!("../../templates/fonts/Inter-SemiBold.otf"),
    include_bytes!("../../templates/fonts/Inter-Bold.otf"),
];

/// Template files for the world and any extra font files, defaults first, then the custom folder's files
/// replacing defaults of the same name.
pub fn load(custom: Option<&Path>) -> Result<(Vec<WorldFile>, Vec<Vec<u8>>)> {
    let mut files: Vec<WorldFile> = DEFAULTS
        .iter()
        .map(|(name, text)| WorldFile {
            vpath: format!("/{name}"),
            bytes: text.as_bytes().to_vec(),
            origin: Origin::Builtin(name),
        })
        .collect();
    let mut fonts = Vec::new();
    let Some(dir) = custom else {
        return Ok((files, fonts));
    };
    for path in fs::files_below(dir)? {
        let rel = path
            .strip_prefix(dir)
            .expect("walked below dir")
            .to_string_lossy()
            .replace('\\', "/");
        let bytes = fs::read(&path)?;
        if is_font(&path) {
            fonts.push(bytes);
            continue;
        }
        let vpath = format!("/{rel}");
        files.retain(|f| f.vpath != vpath);
        files.push(WorldFile {
            vpath,
            bytes,
            origin: Origin::Custom(path),
        });
    }
    Ok((files, fonts))
}

fn is_font(path: &Path) -> bool {
    matches!(
        path.extension()
            .and_then(|e| e.to_str())
            .map(str::to_ascii_lowercase)
            .as_deref(),
        Some("ttf" | "otf" | "ttc")
    )
}
