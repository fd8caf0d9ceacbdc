//! Writing CSV: the one field-quoting rule for every CSV file tailpack writes (`scenarios.csv`,
//! `weights.csv`, the archive's `index.csv`, the demo data).
//!
//! RFC 4180, section 2: a field containing a comma, a double quote, CR or LF is enclosed in double quotes,
//! and a double quote inside it is written twice. Fields with leading or trailing white space are quoted
//! as well (allowed by the RFC, which counts spaces as part of a field), so readers that trim unquoted
//! fields keep them. Any other field is written as it is, so plain files stay byte-for-byte as before.

use std::borrow::Cow;

/// One field, quoted when RFC 4180 requires it (or it has leading or trailing white space).
pub fn field(text: &str) -> Cow<'_, str> {
    let special = text.contains([',', '"', '\r', '\n'])
        || text.starts_with(char::is_whitespace)
        || text.ends_with(char::is_whitespace);
    if special {
        Cow::Owned(format!("\"{}\"", text.replace('"', "\"\"")))
    } else {
        Cow::Borrowed(text)
    }
}

/// Fields joined by commas, each quoted as [`field`] does, without the line end.
pub fn row<'a>(fields: impl IntoIterator<Item = &'a str>) -> String {
    let mut out = String::new();
    for (i, f) in fields.into_iter().enumerate() {
        if i > 0 {
            out.push(',');
        }
        out.push_str(&field(f));
    }
    out
}

#[cfg(test)]
mod tests {
    use super::*;

    // Expected texts follow RFC 4180 section 2, rules 5 to 7, written out by hand.
    #[test]
    fn quotes_only_what_needs_it() {
        assert_eq!(field("AS01"), "AS01");
        assert_eq!(field(""), "");
        assert_eq!(field("Lee, Ann"), "\"Lee, Ann\"");
        assert_eq!(field("a \"b\""), "\"a \"\"b\"\"\"");
        assert_eq!(field("x\ny"), "\"x\ny\"");
        assert_eq!(field("x\r"), "\"x\r\"");
        assert_eq!(field(" lead"), "\" lead\"");
        assert_eq!(field("semi;colon"), "semi;colon");
        assert_eq!(row(["a,b", "c", "\""]), "\"a,b\",c,\"\"\"\"");
    }
}
