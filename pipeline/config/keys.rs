//! Unknown keys and their nearest valid names. The keys are read off the config and stress file structs
//! themselves ([`known`]), so a key added to a `Raw*` struct is suggested without being listed anywhere.

use super::raw::RawConfig;
use super::stress::StressFile;
use super::yaml;
use serde::de::{
    self, DeserializeOwned, DeserializeSeed, IntoDeserializer, MapAccess, SeqAccess, Visitor,
};
use std::cell::RefCell;
use std::fmt;
use std::sync::OnceLock;

/// Every key of the config file and the stress file, each once, in the order the structs declare them.
pub fn known() -> &'static [&'static str] {
    static KNOWN: OnceLock<Vec<&'static str>> = OnceLock::new();
    KNOWN.get_or_init(|| {
        let keys = RefCell::new(Vec::new());
        probe::<RawConfig>(&keys);
        probe::<StressFile>(&keys);
        keys.into_inner()
    })
}

/// Deserialises a `T` from [`Probe`], which records the keys of every struct on the way.
fn probe<T: DeserializeOwned>(keys: &RefCell<Vec<&'static str>>) {
    if let Err(Stop(why)) = T::deserialize(Probe { keys }) {
        unreachable!("the config structs take any value the probe gives: {why}");
    }
}

/// A deserialiser that has every field of every struct: it gives each struct all its fields, each list
/// one element, each option a value and each enum its first variant, so serde walks every nested struct
/// and names its fields on the way.
#[derive(Clone, Copy)]
struct Probe<'a> {
    keys: &'a RefCell<Vec<&'static str>>,
}

#[derive(Debug)]
struct Stop(String);

impl fmt::Display for Stop {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        f.write_str(&self.0)
    }
}

impl std::error::Error for Stop {}

impl de::Error for Stop {
    fn custom<T: fmt::Display>(msg: T) -> Self {
        Stop(msg.to_string())
    }
}

macro_rules! numbers {
    ($($method:ident)*) => {$(
        fn $method<V: Visitor<'de>>(self, v: V) -> Result<V::Value, Stop> {
            v.visit_u64(0)
        }
    )*};
}

impl<'de> de::Deserializer<'de> for Probe<'_> {
    type Error = Stop;

    numbers!(deserialize_i8 deserialize_i16 deserialize_i32 deserialize_i64 deserialize_u8
        deserialize_u16 deserialize_u32 deserialize_u64);

    fn deserialize_any<V: Visitor<'de>>(self, v: V) -> Result<V::Value, Stop> {
        v.visit_unit()
    }
    fn deserialize_bool<V: Visitor<'de>>(self, v: V) -> Result<V::Value, Stop> {
        v.visit_bool(false)
    }
    fn deserialize_f32<V: Visitor<'de>>(self, v: V) -> Result<V::Value, Stop> {
        v.visit_f64(0.0)
    }
    fn deserialize_f64<V: Visitor<'de>>(self, v: V) -> Result<V::Value, Stop> {
        v.visit_f64(0.0)
    }
    fn deserialize_char<V: Visitor<'de>>(self, v: V) -> Result<V::Value, Stop> {
        v.visit_char('x')
    }
    fn deserialize_str<V: Visitor<'de>>(self, v: V) -> Result<V::Value, Stop> {
        v.visit_str("")
    }
    fn deserialize_string<V: Visitor<'de>>(self, v: V) -> Result<V::Value, Stop> {
        v.visit_str("")
    }
    fn deserialize_identifier<V: Visitor<'de>>(self, v: V) -> Result<V::Value, Stop> {
        v.visit_str("")
    }
    fn deserialize_bytes<V: Visitor<'de>>(self, v: V) -> Result<V::Value, Stop> {
        v.visit_bytes(&[])
    }
    fn deserialize_byte_buf<V: Visitor<'de>>(self, v: V) -> Result<V::Value, Stop> {
        v.visit_bytes(&[])
    }
    fn deserialize_option<V: Visitor<'de>>(self, v: V) -> Result<V::Value, Stop> {
        v.visit_some(self)
    }
    fn deserialize_unit<V: Visitor<'de>>(self, v: V) -> Result<V::Value, Stop> {
        v.visit_unit()
    }
    fn deserialize_unit_struct<V: Visitor<'de>>(
        self,
        _: &'static str,
        v: V,
    ) -> Result<V::Value, Stop> {
        v.visit_unit()
    }
    fn deserialize_newtype_struct<V: Visitor<'de>>(
        self,
        _: &'static str,
        v: V,
    ) -> Result<V::Value, Stop> {
        v.visit_newtype_struct(self)
    }
    fn deserialize_seq<V: Visitor<'de>>(self, v: V) -> Result<V::Value, Stop> {
        v.visit_seq(One {
            probe: self,
            left: true,
        })
    }
    fn deserialize_tuple<V: Visitor<'de>>(self, _: usize, v: V) -> Result<V::Value, Stop> {
        self.deserialize_seq(v)
    }
    fn deserialize_tuple_struct<V: Visitor<'de>>(
        self,
        _: &'static str,
        _: usize,
        v: V,
    ) -> Result<V::Value, Stop> {
        self.deserialize_seq(v)
    }
    fn deserialize_map<V: Visitor<'de>>(self, v: V) -> Result<V::Value, Stop> {
        v.visit_map(Fields {
            probe: self,
            rest: &[],
        })
    }
    fn deserialize_struct<V: Visitor<'de>>(
        self,
        _: &'static str,
        fields: &'static [&'static str],
        v: V,
    ) -> Result<V::Value, Stop> {
        let mut keys = self.keys.borrow_mut();
        for f in fields {
            if !keys.contains(f) {
                keys.push(f);
            }
        }
        drop(keys);
        v.visit_map(Fields {
            probe: self,
            rest: fields,
        })
    }
    fn deserialize_enum<V: Visitor<'de>>(
        self,
        _: &'static str,
        variants: &'static [&'static str],
        v: V,
    ) -> Result<V::Value, Stop> {
        let first: &str = variants.first().copied().unwrap_or_default();
        v.visit_enum(first.into_deserializer())
    }
    fn deserialize_ignored_any<V: Visitor<'de>>(self, v: V) -> Result<V::Value, Stop> {
        v.visit_unit()
    }
}

/// Every field of a struct, each with a probed value.
struct Fields<'a> {
    probe: Probe<'a>,
    rest: &'static [&'static str],
}

impl<'de> MapAccess<'de> for Fields<'_> {
    type Error = Stop;
    fn next_key_seed<K: DeserializeSeed<'de>>(
        &mut self,
        seed: K,
    ) -> Result<Option<K::Value>, Stop> {
        let Some((first, rest)) = self.rest.split_first() else {
            return Ok(None);
        };
        self.rest = rest;
        seed.deserialize((*first).into_deserializer()).map(Some)
    }
    fn next_value_seed<V: DeserializeSeed<'de>>(&mut self, seed: V) -> Result<V::Value, Stop> {
        seed.deserialize(self.probe)
    }
}

/// A list of one probed element.
struct One<'a> {
    probe: Probe<'a>,
    left: bool,
}

impl<'de> SeqAccess<'de> for One<'_> {
    type Error = Stop;
    fn next_element_seed<T: DeserializeSeed<'de>>(
        &mut self,
        seed: T,
    ) -> Result<Option<T::Value>, Stop> {
        if !std::mem::take(&mut self.left) {
            return Ok(None);
        }
        seed.deserialize(self.probe).map(Some)
    }
}

/// The parser's message, with the nearest valid key after an unknown one: among the keys serde expected
/// at that place, or among every [`known`] key when it names none.
pub(super) fn describe_yaml_error(e: &serde_yaml_ng::Error) -> String {
    let msg = yaml::message(e);
    let Some(unknown) = between(&msg, "unknown field `", "`") else {
        return msg;
    };
    let expected: Vec<&str> = msg.split('`').skip(3).step_by(2).collect();
    let pool: Vec<&str> = if expected.is_empty() {
        known().to_vec()
    } else {
        expected
    };
    match nearest(unknown, &pool) {
        Some(best) => format!("{msg}; did you mean `{best}`?"),
        None => msg,
    }
}
fn between<'a>(s: &'a str, start: &str, end: &str) -> Option<&'a str> {
    let from = s.find(start)? + start.len();
    let len = s[from..].find(end)?;
    Some(&s[from..from + len])
}

/// The candidate closest to `word` by edit distance, if it is close enough to be a plausible typo.
pub fn nearest<'a>(word: &str, candidates: &[&'a str]) -> Option<&'a str> {
    let (best, dist) = candidates
        .iter()
        .map(|c| (*c, levenshtein(word, c)))
        .min_by_key(|(_, d)| *d)?;
    (dist <= word.len().max(3) / 2 + 1).then_some(best)
}

fn levenshtein(a: &str, b: &str) -> usize {
    let b: Vec<char> = b.chars().collect();
    let mut row: Vec<usize> = (0..=b.len()).collect();
    for (i, ca) in a.chars().enumerate() {
        let mut prev = row[0];
        row[0] = i + 1;
        for (j, cb) in b.iter().enumerate() {
            let cur = row[j + 1];
            row[j + 1] = (prev + usize::from(ca != *cb)).min(row[j] + 1).min(cur + 1);
            prev = cur;
        }
    }
    row[b.len()]
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn suggests_nearest_key() {
        assert_eq!(nearest("horizn", &["horizon", "step"]), Some("horizon"));
        assert_eq!(nearest("zzzzzzzzz", &["horizon", "step"]), None);
    }

    /// Keys at every depth, renamed ones and those named after the model families are all found.
    #[test]
    fn known_keys_are_read_off_every_nested_struct() {
        let known = known();
        for key in [
            "fund",
            "funds",
            "short_name",
            "prices",
            "layout",
            "turnover_max",
            "groups",
            "tag",
            "cvar_cap",
            "times_min",
            "plus_current",
            "backend",
            "root",
            "typeset_memory_mb",
            "roles",
            "keys",
            "historical_windows",
            "shocks",
            "description",
            "return",
        ] {
            assert!(known.contains(&key), "`{key}` missing from {known:?}");
        }
        use crate::models::Family;
        for f in [Family::MaxReturn, Family::MinCvar] {
            assert!(known.contains(&f.name()), "{}", f.name());
        }
        let mut sorted = known.to_vec();
        sorted.sort();
        sorted.dedup();
        assert_eq!(sorted.len(), known.len(), "each key once");
    }

    /// Every key serde names as expected after an unknown one, at the top and in a nested section, is
    /// among the known keys: the list is what the parser accepts, not a copy of it.
    #[test]
    fn known_keys_hold_every_key_the_parser_expects() {
        for text in [
            "zzz: 1\n",
            "data:\n  zzz: 1\n",
            "limits:\n  groups:\n    - zzz: 1\n",
            "models:\n  max_return:\n    cvar_cap:\n      zzz: 1\n",
            "signoff:\n  roles:\n    - zzz: 1\n",
            "funds:\n  - zzz: 1\n",
        ] {
            let e = serde_yaml_ng::from_str::<RawConfig>(text).expect_err(text);
            let msg = e.to_string();
            let expected: Vec<&str> = msg.split('`').skip(3).step_by(2).collect();
            assert!(expected.len() > 1, "{msg}");
            for k in expected {
                assert!(known().contains(&k), "`{k}` ({text:?}) is not known");
            }
        }
    }
}
