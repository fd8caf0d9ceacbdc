//! Findings that travel with results: data-quality notes, model checks, solver remarks.
//!
//! A finding is a value, not a log line: the same list reaches the terminal, `results.json` and (with the
//! report stage) the PDF's checks table.

use serde::Serialize;

/// Outcome of one check.
#[derive(Debug, Clone, Copy, PartialEq, Eq, PartialOrd, Ord, Serialize, schemars::JsonSchema)]
#[serde(rename_all = "snake_case")]
pub enum Level {
    Pass,
    Warn,
    Fail,
}

impl Level {
    /// Lower-case word used in text output.
    pub fn word(self) -> &'static str {
        match self {
            Level::Pass => "pass",
            Level::Warn => "warn",
            Level::Fail => "fail",
        }
    }
}

/// One check with its outcome and the evidence behind it.
#[derive(Debug, Clone, Serialize, schemars::JsonSchema)]
pub struct Check {
    /// Stable identifier, e.g. `quality.stale_run` or `max_ratio.precondition.cvar_positive`.
    pub id: String,
    /// `pass`, `warn` or `fail`.
    pub level: Level,
    /// What was checked and what was found, with the numbers.
    pub message: String,
}

impl Check {
    pub fn new(id: impl Into<String>, level: Level, message: impl Into<String>) -> Self {
        Check {
            id: id.into(),
            level,
            message: message.into(),
        }
    }
    pub fn pass(id: impl Into<String>, message: impl Into<String>) -> Self {
        Self::new(id, Level::Pass, message)
    }
    pub fn warn(id: impl Into<String>, message: impl Into<String>) -> Self {
        Self::new(id, Level::Warn, message)
    }
    pub fn fail(id: impl Into<String>, message: impl Into<String>) -> Self {
        Self::new(id, Level::Fail, message)
    }
}
