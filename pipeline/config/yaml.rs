//! The config and stress files as plain YAML, before and beside the config types: every text value is
//! bounded in length before anything is read into a `String` field, and the line of a key path is found
//! for messages about values that parsed but are wrong.
//!
//! Both walk the text with serde_yaml_ng's own parser, so lines and columns are the parser's (1-based).
//! Neither reads a file: `config` hands them the text.

use serde::de::{self, DeserializeSeed, IgnoredAny, MapAccess, SeqAccess, Visitor};
use std::cell::Cell;
use std::fmt;

/// Largest config or stress file read, in bytes. Real ones are a few KB; a file this large is not one,
/// and is refused before the YAML parser sees it.
pub const MAX_FILE_BYTES: u64 = 2 * 1024 * 1024;
/// Longest name, title, role, code, tag or key, in characters: fund name and short name, cover lines
/// (`prepared_for`, `prepared_by`), group names and tags, asset codes, role names and titles, shock names,
/// and every other short text value. The asset metadata's text cells have the same bound.
pub const MAX_NAME_CHARS: usize = 200;
/// Longest paragraph, in characters: a stress shock's `description`.
pub const MAX_PARAGRAPH_CHARS: usize = 4000;
/// Longest path, in bytes (Linux's PATH_MAX): `data.prices`, `data.assets`, `data.holdings`,
/// `funds[].holdings`, `stress.file`, `output.root`, `report.templates`.
pub const MAX_PATH_BYTES: usize = 4096;

/// Keys whose value is a paragraph.
const PARAGRAPH_KEYS: &[&str] = &["description"];
/// Keys whose scalar value is a path besides those of the input files ([`super::inputs`]): the pack root.
/// (A list under `assets` is a list of asset codes.)
const OTHER_PATH_KEYS: &[&str] = &["root"];

/// Whether a key's scalar value is a path: the last part of an input file's config key, or another path.
fn is_path_key(key: &str) -> bool {
    OTHER_PATH_KEYS.contains(&key)
        || super::inputs::Input::ALL
            .iter()
            .filter_map(|k| k.key())
            .any(|k| super::inputs::leaf(k) == key)
}

/// The first text value longer than its bound, as "key.path: a text of N characters; …at line L column C";
/// `None` when every text fits (or the YAML is broken, which the typed parse reports).
pub fn overlong_text(text: &str) -> Option<String> {
    let hit = Cell::new(false);
    let walk = Walk {
        kind: Kind::Name,
        hit: &hit,
    };
    match walk.deserialize(serde_yaml_ng::Deserializer::from_str(text)) {
        Err(e) if hit.get() => Some(message(&e)),
        _ => None,
    }
}

/// A parser error as text, always with its line and column where the parser knows them (serde_yaml_ng
/// leaves out "line 1 column 1", so an error on a file's first key would have no place).
pub fn message(e: &serde_yaml_ng::Error) -> String {
    let text = e.to_string();
    match e.location() {
        Some(at) if !text.contains(" at line ") => {
            format!("{text} at line {} column {}", at.line(), at.column())
        }
        _ => text,
    }
}

/// Where a key path is in the text.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub struct Place {
    /// 1-based line.
    pub line: usize,
    /// 1-based column.
    pub column: usize,
    /// Whether the whole path is in the text; otherwise the place is that of its longest part that is
    /// (e.g. the `fund` section for a missing `fund.name`).
    pub exact: bool,
    /// How many steps of the path (keys and list indices) are in the text: 0 when not even the first is.
    pub matched: usize,
}

/// Where the value at `key` (`limits.groups[0].name`, `shocks[2].moves[1].tag`) is in YAML `text`, or
/// the longest part of the path that is there; `None` for a key path that is not of that form or text
/// that does not parse.
pub fn locate(text: &str, key: &str) -> Option<Place> {
    let steps = steps(key)?;
    let found = Cell::new(None);
    let find = Find {
        rest: &steps,
        depth: 0,
        found: &found,
    };
    let err = find
        .deserialize(serde_yaml_ng::Deserializer::from_str(text))
        .err()?;
    let (matched, at) = (found.get()?, err.location()?);
    Some(Place {
        line: at.line(),
        column: at.column(),
        exact: matched == steps.len(),
        matched,
    })
}

/// One step of a key path.
#[derive(Debug, PartialEq)]
enum Step<'a> {
    Key(&'a str),
    Index(usize),
}

/// `limits.groups[0].name` → `limits`, `groups`, 0, `name`.
fn steps(key: &str) -> Option<Vec<Step<'_>>> {
    let mut out = Vec::new();
    for part in key.split('.') {
        let (name, mut rest) = part.split_at(part.find('[').unwrap_or(part.len()));
        if name.is_empty() || name.contains([' ', '`', ']']) {
            return None;
        }
        out.push(Step::Key(name));
        while let Some(inner) = rest.strip_prefix('[') {
            let close = inner.find(']')?;
            out.push(Step::Index(inner[..close].parse().ok()?));
            rest = &inner[close + 1..];
        }
        if !rest.is_empty() {
            return None;
        }
    }
    Some(out)
}

/// How a text value is bounded.
#[derive(Debug, Clone, Copy)]
enum Kind {
    Name,
    Paragraph,
    Path,
}

impl Kind {
    fn of_key(key: &str) -> Kind {
        if PARAGRAPH_KEYS.contains(&key) {
            Kind::Paragraph
        } else if is_path_key(key) {
            Kind::Path
        } else {
            Kind::Name
        }
    }

    /// The bound of a list's items: a list under a path key (`assets: [..]`) holds codes.
    fn in_list(self) -> Kind {
        match self {
            Kind::Path => Kind::Name,
            k => k,
        }
    }

    /// Why `s` is too long, if it is.
    fn refuse(self, s: &str) -> Option<String> {
        let chars = |max: usize, what: &str| {
            let n = s.chars().count();
            (n > max).then(|| {
                format!("a text of {n} characters; {what} may have at most {max} characters")
            })
        };
        match self {
            Kind::Name => chars(MAX_NAME_CHARS, "a name, title, code, tag or key"),
            Kind::Paragraph => chars(MAX_PARAGRAPH_CHARS, "a description"),
            Kind::Path if s.chars().any(char::is_control) => Some(
                "a path with a line break, tab or another control character; inputs are archived and \
                 listed one file per line (inputs.sha256), so rename the file or folder"
                    .into(),
            ),
            Kind::Path => (s.len() > MAX_PATH_BYTES).then(|| {
                format!(
                    "a path of {} bytes; a path may have at most {MAX_PATH_BYTES} bytes",
                    s.len()
                )
            }),
        }
    }
}

/// Visits every value, refusing the first text longer than its bound (`hit` says the error is ours).
#[derive(Clone, Copy)]
struct Walk<'a> {
    kind: Kind,
    hit: &'a Cell<bool>,
}

impl Walk<'_> {
    fn bound<E: de::Error>(self, s: &str) -> Result<(), E> {
        match self.kind.refuse(s) {
            Some(why) => {
                self.hit.set(true);
                Err(E::custom(why))
            }
            None => Ok(()),
        }
    }
}

impl<'de> DeserializeSeed<'de> for Walk<'_> {
    type Value = ();
    fn deserialize<D: de::Deserializer<'de>>(self, d: D) -> Result<(), D::Error> {
        d.deserialize_any(self)
    }
}

impl<'de> Visitor<'de> for Walk<'_> {
    type Value = ();
    fn expecting(&self, f: &mut fmt::Formatter) -> fmt::Result {
        f.write_str("any YAML value")
    }
    fn visit_bool<E>(self, _: bool) -> Result<(), E> {
        Ok(())
    }
    fn visit_i64<E>(self, _: i64) -> Result<(), E> {
        Ok(())
    }
    fn visit_u64<E>(self, _: u64) -> Result<(), E> {
        Ok(())
    }
    fn visit_i128<E>(self, _: i128) -> Result<(), E> {
        Ok(())
    }
    fn visit_u128<E>(self, _: u128) -> Result<(), E> {
        Ok(())
    }
    fn visit_f64<E>(self, _: f64) -> Result<(), E> {
        Ok(())
    }
    fn visit_unit<E>(self) -> Result<(), E> {
        Ok(())
    }
    fn visit_none<E>(self) -> Result<(), E> {
        Ok(())
    }
    fn visit_some<D: de::Deserializer<'de>>(self, d: D) -> Result<(), D::Error> {
        d.deserialize_any(self)
    }
    fn visit_str<E: de::Error>(self, s: &str) -> Result<(), E> {
        self.bound(s)
    }
    fn visit_seq<A: SeqAccess<'de>>(self, mut seq: A) -> Result<(), A::Error> {
        let item = Walk {
            kind: self.kind.in_list(),
            ..self
        };
        while seq.next_element_seed(item)?.is_some() {}
        Ok(())
    }
    fn visit_map<A: MapAccess<'de>>(self, mut map: A) -> Result<(), A::Error> {
        while let Some(key) = map.next_key_seed(KeyText(self.hit))? {
            map.next_value_seed(Walk {
                kind: Kind::of_key(&key),
                hit: self.hit,
            })?;
        }
        Ok(())
    }
    fn visit_enum<A: de::EnumAccess<'de>>(self, data: A) -> Result<(), A::Error> {
        // A tagged value (`!tag value`): the tag is bounded like a name, the value as usual.
        let tag = Walk {
            kind: Kind::Name,
            hit: self.hit,
        };
        let ((), value) = data.variant_seed(tag)?;
        de::VariantAccess::newtype_variant_seed(value, self)
    }
}

/// A map key, bounded like a name; its text when it is one (keys of other types give "").
#[derive(Clone, Copy)]
struct KeyText<'a>(&'a Cell<bool>);

impl<'de> DeserializeSeed<'de> for KeyText<'_> {
    type Value = String;
    fn deserialize<D: de::Deserializer<'de>>(self, d: D) -> Result<String, D::Error> {
        d.deserialize_any(self)
    }
}

impl<'de> Visitor<'de> for KeyText<'_> {
    type Value = String;
    fn expecting(&self, f: &mut fmt::Formatter) -> fmt::Result {
        f.write_str("a key")
    }
    fn visit_str<E: de::Error>(self, s: &str) -> Result<String, E> {
        Walk {
            kind: Kind::Name,
            hit: self.0,
        }
        .bound(s)?;
        Ok(s.to_string())
    }
    fn visit_bool<E>(self, _: bool) -> Result<String, E> {
        Ok(String::new())
    }
    fn visit_i64<E>(self, _: i64) -> Result<String, E> {
        Ok(String::new())
    }
    fn visit_u64<E>(self, _: u64) -> Result<String, E> {
        Ok(String::new())
    }
    fn visit_i128<E>(self, _: i128) -> Result<String, E> {
        Ok(String::new())
    }
    fn visit_u128<E>(self, _: u128) -> Result<String, E> {
        Ok(String::new())
    }
    fn visit_f64<E>(self, _: f64) -> Result<String, E> {
        Ok(String::new())
    }
    fn visit_unit<E>(self) -> Result<String, E> {
        Ok(String::new())
    }
    fn visit_seq<A: SeqAccess<'de>>(self, seq: A) -> Result<String, A::Error> {
        self.walk().visit_seq(seq).map(|()| String::new())
    }
    fn visit_map<A: MapAccess<'de>>(self, map: A) -> Result<String, A::Error> {
        self.walk().visit_map(map).map(|()| String::new())
    }
    fn visit_enum<A: de::EnumAccess<'de>>(self, data: A) -> Result<String, A::Error> {
        self.walk().visit_enum(data).map(|()| String::new())
    }
}

impl<'a> KeyText<'a> {
    fn walk(self) -> Walk<'a> {
        Walk {
            kind: Kind::Name,
            hit: self.0,
        }
    }
}

/// Follows a key path and stops with an error at the deepest node of it that exists, whose place the
/// parser then reports. Each node reached records how many steps led to it (`found`), so the last record
/// is that of the node the error comes from.
struct Find<'a, 'k> {
    rest: &'k [Step<'k>],
    depth: usize,
    found: &'a Cell<Option<usize>>,
}

impl<'a, 'k> Find<'a, 'k> {
    fn next(&self) -> Find<'a, 'k> {
        Find {
            rest: &self.rest[1..],
            depth: self.depth + 1,
            found: self.found,
        }
    }
}

impl<'de> DeserializeSeed<'de> for Find<'_, '_> {
    type Value = ();
    fn deserialize<D: de::Deserializer<'de>>(self, d: D) -> Result<(), D::Error> {
        self.found.set(Some(self.depth));
        d.deserialize_any(self)
    }
}

impl<'de> Visitor<'de> for Find<'_, '_> {
    type Value = ();
    fn expecting(&self, f: &mut fmt::Formatter) -> fmt::Result {
        // Every visit ends in an error (the place is what is wanted); scalars end in serde's default
        // "invalid type" one, which carries the same place.
        f.write_str("the end of a key path")
    }
    fn visit_map<A: MapAccess<'de>>(self, mut map: A) -> Result<(), A::Error> {
        if let Some(Step::Key(want)) = self.rest.first() {
            while let Some(key) = map.next_key::<KeyOrOther>()? {
                if key.0.as_deref() == Some(*want) {
                    return map.next_value_seed(self.next());
                }
                map.next_value::<IgnoredAny>()?;
            }
        }
        self.found.set(Some(self.depth));
        Err(de::Error::custom("here"))
    }
    fn visit_seq<A: SeqAccess<'de>>(self, mut seq: A) -> Result<(), A::Error> {
        if let Some(Step::Index(want)) = self.rest.first() {
            for _ in 0..*want {
                if seq.next_element::<IgnoredAny>()?.is_none() {
                    break;
                }
            }
            seq.next_element_seed(self.next())?;
        }
        self.found.set(Some(self.depth));
        Err(de::Error::custom("here"))
    }
}

/// A map key: its text, or `None` for a key that is not text.
struct KeyOrOther(Option<String>);

impl<'de> de::Deserialize<'de> for KeyOrOther {
    fn deserialize<D: de::Deserializer<'de>>(d: D) -> Result<Self, D::Error> {
        let v = serde_yaml_ng::Value::deserialize(d)?;
        Ok(KeyOrOther(v.as_str().map(str::to_string)))
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn key_paths_split_into_steps() {
        assert_eq!(
            steps("limits.groups[0].name"),
            Some(vec![
                Step::Key("limits"),
                Step::Key("groups"),
                Step::Index(0),
                Step::Key("name")
            ])
        );
        assert_eq!(steps("shocks[1] `x`"), None);
        assert_eq!(steps("a[b]"), None);
    }

    #[test]
    fn locate_finds_nested_keys_and_the_longest_part_present() {
        let text = "fund:\n  name: X\nlimits:\n  groups:\n    - { name: A, max: 0.5 }\n    - name: B\n      tag: \"class:x\"\n";
        let at = |k| locate(text, k).map(|p| (p.line, p.column, p.exact));
        assert_eq!(at("fund.name"), Some((2, 9, true)));
        assert_eq!(at("limits.groups[1].tag"), Some((7, 12, true)));
        assert_eq!(at("limits.groups[0].max"), Some((5, 23, true)));
        assert_eq!(at("fund.short_name"), Some((2, 3, false)));
        assert_eq!(at("limits.groups[5].name").map(|p| p.2), Some(false));
        assert_eq!(locate(text, "limits.groups[5].name").unwrap().matched, 2);
        assert_eq!(locate(text, "nothing.here").unwrap().matched, 0);
    }

    #[test]
    fn bounds_name_paragraph_and_path() {
        let long = "x".repeat(MAX_NAME_CHARS + 1);
        let m = overlong_text(&format!("fund:\n  name: {long}\n")).unwrap();
        assert!(m.starts_with("fund.name: a text of 201 characters"), "{m}");
        assert!(m.ends_with("at line 2 column 9"), "{m}");
        let ok = "y".repeat(MAX_PARAGRAPH_CHARS);
        assert_eq!(
            overlong_text(&format!("shocks:\n  - description: {ok}\n")),
            None
        );
        let m = overlong_text(&format!("shocks:\n  - description: {ok}z\n")).unwrap();
        assert!(m.contains("a description may have at most 4000"), "{m}");
        assert_eq!(overlong_text(&format!("data:\n  prices: {long}\n")), None);
        let m = overlong_text(&format!("limits:\n  groups: [{{assets: [a, {long}]}}]\n")).unwrap();
        assert!(m.contains("a name, title, code, tag or key"), "{m}");
        let m = overlong_text(&format!("{long}: 1\n")).unwrap();
        assert!(m.contains("at line 1 column 1"), "{m}");
        assert_eq!(overlong_text("a: [unclosed\n"), None);
    }
}
