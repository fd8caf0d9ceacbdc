//! The report's view model: the portfolios the pack shows, in print order, each with its identity (label,
//! aim, colour, marker), and the small rows and helpers every part of the report shares (class order and
//! sums by class, the column head of a portfolio, a label–value pair).
//!
//! Everything else in `report` that shows a portfolio reads it from here: the display data, the sentences
//! and the charts, so the same portfolio has the same name, colour and marker in every table and chart.
//! The colours are our own, chosen to stay apart under the common colour-vision deficiencies by differing in
//! lightness as well as hue (dark charcoal, mid orange, mid blue, light gold); the marker shape carries the
//! same information again, so nothing depends on colour alone.
//!
//! May read: the [`RunResult`]. Imports nothing else of `report`.

use crate::analysis::stress::StressResult;
use crate::models::{Family, Status};
use crate::risk::RiskProfile;
use crate::run::{ModelReport, RunResult};
use serde::Serialize;

/// The key of the current holdings among the portfolio keys (the others are family names).
pub const CURRENT: &str = "current";

/// A marker shape, drawn the same way in charts and (by name) in the tables' legends.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Marker {
    Circle,
    Triangle,
    Square,
    Diamond,
}

impl Marker {
    /// The shape's name as `portfolio-name` in style.typ draws it.
    pub const fn name(self) -> &'static str {
        match self {
            Marker::Circle => "circle",
            Marker::Triangle => "triangle",
            Marker::Square => "square",
            Marker::Diamond => "diamond",
        }
    }
}

/// How one portfolio is recognised everywhere in the pack: the current holdings, or a model family with
/// the label and aim [`Family`] gives it, plus the colour and marker the report gives it.
#[derive(Debug)]
pub struct Identity {
    /// The model family, or `None` for the current holdings.
    pub family: Option<Family>,
    /// `current` or the family's serialised name.
    pub key: &'static str,
    pub label: &'static str,
    pub aim: &'static str,
    /// Red, green and blue, 0–255.
    pub rgb: [u8; 3],
    pub marker: Marker,
}

impl Identity {
    const fn holdings(rgb: [u8; 3], marker: Marker) -> Identity {
        Identity {
            family: None,
            key: CURRENT,
            label: "Current",
            aim: "holdings at the as-of date",
            rgb,
            marker,
        }
    }

    const fn family(family: Family, rgb: [u8; 3], marker: Marker) -> Identity {
        Identity {
            family: Some(family),
            key: family.name(),
            label: family.label(),
            aim: family.aim(),
            rgb,
            marker,
        }
    }

    /// The colour as `#rrggbb`, as the templates take it.
    pub fn hex(&self) -> String {
        let [r, g, b] = self.rgb;
        format!("#{r:02x}{g:02x}{b:02x}")
    }
}

/// Every portfolio identity, in report order: the current holdings, then the families.
pub const IDENTITIES: [Identity; 4] = [
    Identity::holdings([0x3b, 0x41, 0x4b], Marker::Circle),
    Identity::family(Family::MaxReturn, [0xc8, 0x62, 0x1c], Marker::Triangle),
    Identity::family(Family::MinCvar, [0x2c, 0x72, 0xad], Marker::Square),
    Identity::family(Family::MaxRatio, [0xdb, 0xa7, 0x2e], Marker::Diamond),
];

/// The identity of a portfolio key (`current` or a family name); an unknown key gets the first.
pub fn identity(key: &str) -> &'static Identity {
    IDENTITIES
        .iter()
        .find(|i| i.key == key)
        .unwrap_or(&IDENTITIES[0])
}

/// The identity of a model family.
pub fn identity_of(family: Family) -> &'static Identity {
    identity(family.name())
}

/// A portfolio as the report shows it: the current holdings or one model's answer.
pub struct Portfolio<'a> {
    pub key: &'static str,
    pub identity: &'static Identity,
    pub weights: Option<&'a [f64]>,
    pub profile: Option<&'a RiskProfile>,
    pub model: Option<&'a ModelReport>,
}

/// The current portfolio (when holdings were given) followed by the models, in report order.
pub fn portfolios(r: &RunResult) -> Vec<Portfolio<'_>> {
    let current = r.data.holdings.as_deref().map(|h| Portfolio {
        key: CURRENT,
        identity: identity(CURRENT),
        weights: Some(h),
        profile: r.current.as_ref(),
        model: None,
    });
    let models = r.models.iter().map(|m| Portfolio {
        key: m.name,
        identity: identity(m.name),
        weights: m.outcome.weights.as_deref(),
        profile: m.profile.as_ref(),
        model: Some(m),
    });
    current.into_iter().chain(models).collect()
}

/// True when a model has an optimal solution.
pub fn solved(m: &ModelReport) -> bool {
    m.outcome.status == Status::Optimal && m.profile.is_some()
}

/// The status as printed: `held` for the current portfolio, else the model status in words.
pub fn status_word(p: &Portfolio) -> String {
    match p.model {
        None => "held".into(),
        Some(m) => m.outcome.status.word().replace('_', " "),
    }
}

/// The stress result of a portfolio key (`current` or a model name), if it was stressed.
pub fn stress_result<'a>(r: &'a RunResult, key: &str) -> Option<&'a StressResult> {
    r.analysis.stress.iter().find(|s| s.portfolio == key)
}

/// Asset classes in first-seen order of the asset list.
pub fn class_order(r: &RunResult) -> Vec<String> {
    let mut out: Vec<String> = Vec::new();
    for m in &r.data.meta {
        if !out.contains(&m.class) {
            out.push(m.class.clone());
        }
    }
    out
}

/// Σ of `values` over the assets of `class`.
pub fn class_sum(r: &RunResult, values: &[f64], class: &str) -> f64 {
    r.data
        .meta
        .iter()
        .zip(values)
        .filter(|(m, _)| m.class == class)
        .map(|(_, v)| v)
        .sum()
}

/// A column head: a portfolio's label with its colour and marker, as `portfolio-name` in style.typ draws it.
#[derive(Serialize)]
pub struct Head {
    pub key: &'static str,
    pub label: &'static str,
    pub colour: String,
    pub marker: &'static str,
}

impl Head {
    /// The head of a portfolio identity.
    pub fn of(id: &Identity) -> Head {
        Head {
            key: id.key,
            label: id.label,
            colour: id.hex(),
            marker: id.marker.name(),
        }
    }
}

/// A label and a value, for definition lists.
#[derive(Serialize)]
pub struct Pair {
    pub label: String,
    pub value: String,
}

/// A [`Pair`] from anything that reads as text.
pub fn pair(label: &str, value: impl Into<String>) -> Pair {
    Pair {
        label: label.into(),
        value: value.into(),
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn every_family_has_one_identity_of_its_own() {
        for f in Family::ALL {
            let id = identity_of(f);
            assert_eq!(id.family, Some(f));
            assert_eq!((id.key, id.label), (f.name(), f.label()));
        }
        assert_eq!(IDENTITIES.len(), Family::ALL.len() + 1);
        assert_eq!(identity(CURRENT).family, None);
        for (i, a) in IDENTITIES.iter().enumerate() {
            for b in &IDENTITIES[i + 1..] {
                assert_ne!(a.key, b.key);
                assert_ne!(a.rgb, b.rgb, "{} and {} share a colour", a.key, b.key);
                assert_ne!(a.marker, b.marker, "{} and {} share a marker", a.key, b.key);
            }
        }
    }

    #[test]
    fn colours_print_as_six_hex_digits() {
        assert_eq!(IDENTITIES[0].hex(), "#3b414b");
        assert_eq!(identity_of(Family::MaxRatio).hex(), "#dba72e");
    }
}
