//! How numbers are printed in the PDF. Every figure of the pack is formatted here, in Rust, before typst
//! sees it, so the PDF, the tests and the README agree on "formatted as printed". Also the two text helpers
//! every part shares: a sentence that ends in a full stop, and a shortened list of names.
//!
//! The rule for percentages (README, "The PDF pack"): two decimals everywhere; returns and differences
//! carry a sign (`+0.31%`, `−0.12%`); losses (VaR, CVaR, worst loss, CVaR contributions) and weights are
//! printed without a plus sign, a positive loss meaning money lost; a value that rounds to zero prints
//! `0.00%` without a sign; the minus sign is U+2212.

/// Which kind of quantity a percentage is, and so whether it carries a sign.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Style {
    /// An expected or realised return: always signed.
    Return,
    /// A loss measure (VaR, CVaR, worst loss, contribution): a positive number is a loss.
    Loss,
    /// A portfolio weight, bound or turnover.
    Weight,
    /// A difference between two percentages, in percentage points: always signed, unit ` pp`.
    Points,
}

/// What a cell prints when there is no figure (an unsolved portfolio, a part that did not run): an em dash.
pub const NONE: &str = "\u{2014}";

/// The minus sign used in every printed number.
pub const MINUS: char = '\u{2212}';

/// Formats a fraction (0.0531 = 5.31%) by the pack's one rule; non-finite values print `n/a`.
pub fn pct(x: f64, style: Style) -> String {
    if !x.is_finite() {
        return "n/a".into();
    }
    let digits = format!("{:.2}", (x * 100.0).abs());
    let rounds_to_zero = digits.bytes().all(|b| b == b'0' || b == b'.');
    let sign = match () {
        _ if rounds_to_zero => String::new(),
        _ if x < 0.0 => MINUS.to_string(),
        _ if matches!(style, Style::Return | Style::Points) => "+".into(),
        _ => String::new(),
    };
    let unit = if style == Style::Points { " pp" } else { "%" };
    format!("{sign}{digits}{unit}")
}

/// A weight in a table: `–` (en dash) when it rounds to zero, so the held positions stand out.
pub fn weight(x: f64) -> String {
    if x.abs() < 0.00005 {
        "\u{2013}".into()
    } else {
        pct(x, Style::Weight)
    }
}

/// A confidence level without trailing zeros: 0.95 → `95%`, 0.975 → `97.5%`.
pub fn level(c: f64) -> String {
    let s = format!("{:.2}", c * 100.0);
    format!("{}%", s.trim_end_matches('0').trim_end_matches('.'))
}

/// A plain number with `decimals` decimals and the pack's minus sign.
pub fn number(x: f64, decimals: usize) -> String {
    if !x.is_finite() {
        return "n/a".into();
    }
    let s = format!("{:.*}", decimals, x.abs());
    let zero = s.bytes().all(|b| b == b'0' || b == b'.');
    if x < 0.0 && !zero {
        format!("{MINUS}{s}")
    } else {
        s
    }
}

/// A test's p-value: three decimals, or `< 0.001` below that, so a tiny p-value never prints as zero.
pub fn p_value(p: f64) -> String {
    if p.is_finite() && p < 0.0005 {
        "< 0.001".into()
    } else {
        number(p, 3)
    }
}

/// A probability that is not a portfolio figure (a cumulative binomial probability), as a percentage
/// with two decimals; it carries no sign, like a weight.
pub fn probability(p: f64) -> String {
    pct(p, Style::Weight)
}

/// A count with thousands separators: 1284 → `1,284`.
pub fn count(n: usize) -> String {
    grouped(&n.to_string())
}

/// An amount of money in whole units of the base currency, with thousands separators and the pack's minus
/// sign: `money(-1234567.4, Style::Return)` → `−1,234,567`. Returns and differences (`Style::Return`,
/// `Style::Points`: a purchase, a profit) carry a plus sign when positive; losses and weights do not. An
/// amount that rounds to zero prints `0` without a sign; non-finite amounts print `n/a`.
pub fn money(amount: f64, style: Style) -> String {
    if !amount.is_finite() {
        return "n/a".into();
    }
    let whole = amount.abs().round();
    if whole > u64::MAX as f64 {
        return "n/a".into();
    }
    let digits = grouped(&format!("{whole:.0}"));
    let sign = match () {
        _ if whole == 0.0 => "",
        _ if amount < 0.0 => "\u{2212}",
        _ if matches!(style, Style::Return | Style::Points) => "+",
        _ => "",
    };
    format!("{sign}{digits}")
}

/// An amount of money with its currency code in front: `XTS 123,375,000`, `XTS −2,040,000`.
pub fn money_in(amount: f64, currency: &str, style: Style) -> String {
    format!("{currency} {}", money(amount, style))
}

/// Digits grouped in threes with commas.
fn grouped(digits: &str) -> String {
    let mut out = String::new();
    for (i, ch) in digits.chars().enumerate() {
        if i > 0 && (digits.len() - i).is_multiple_of(3) {
            out.push(',');
        }
        out.push(ch);
    }
    out
}

/// An ISO date written out for the cover: 2026-11-30 → `30 November 2026`.
pub fn long_date(d: chrono::NaiveDate) -> String {
    d.format("%-d %B %Y").to_string()
}

/// A scenario label `start/end` as `start to end`.
pub fn window(label: &str) -> String {
    label.replace('/', " to ")
}

/// A class or tag value as a heading: `inflation_linked` → `Inflation linked`.
pub fn title(raw: &str) -> String {
    let spaced = raw.replace(['_', '-'], " ");
    let mut chars = spaced.chars();
    match chars.next() {
        Some(first) => first.to_uppercase().chain(chars).collect(),
        None => String::new(),
    }
}

/// Text ending in a full stop (descriptions in the stress file may or may not have one).
pub fn sentence(text: &str) -> String {
    let t = text.trim();
    if t.is_empty() || t.ends_with(['.', '!', '?']) {
        t.to_string()
    } else {
        format!("{t}.")
    }
}

/// The first `n` names joined by commas, and how many more there are: `A, B and 3 more`.
pub fn shortlist(names: &[String], n: usize) -> String {
    if names.len() <= n {
        names.join(", ")
    } else {
        format!("{} and {} more", names[..n].join(", "), names.len() - n)
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn percentages_follow_the_one_rule() {
        assert_eq!(pct(0.0031, Style::Return), "+0.31%");
        assert_eq!(pct(-0.0012, Style::Return), "\u{2212}0.12%");
        assert_eq!(pct(0.0525, Style::Loss), "5.25%");
        assert_eq!(pct(-0.00001, Style::Return), "0.00%");
        assert_eq!(pct(0.0022, Style::Points), "+0.22 pp");
        assert_eq!(pct(f64::NAN, Style::Loss), "n/a");
        assert_eq!(weight(0.0), "\u{2013}");
        assert_eq!(weight(0.1), "10.00%");
    }

    #[test]
    fn levels_counts_and_dates() {
        assert_eq!(level(0.95), "95%");
        assert_eq!(level(0.975), "97.5%");
        assert_eq!(count(1284), "1,284");
        assert_eq!(count(999), "999");
        assert_eq!(long_date("2026-11-30".parse().unwrap()), "30 November 2026");
        assert_eq!(title("inflation_linked"), "Inflation linked");
        assert_eq!(number(-0.5, 1), "\u{2212}0.5");
        assert_eq!(p_value(0.041642), "0.042");
        assert_eq!(p_value(0.00024), "< 0.001");
        assert_eq!(p_value(1.0), "1.000");
    }

    #[test]
    fn money_has_separators_a_sign_rule_and_a_code() {
        assert_eq!(money(123_375_000.0, Style::Loss), "123,375,000");
        assert_eq!(money(-1_234_567.4, Style::Return), "\u{2212}1,234,567");
        assert_eq!(money(2_040_000.0, Style::Return), "+2,040,000");
        assert_eq!(money(0.4, Style::Return), "0");
        assert_eq!(money(-0.4, Style::Return), "0");
        assert_eq!(money(999.0, Style::Loss), "999");
        assert_eq!(money(f64::INFINITY, Style::Loss), "n/a");
        assert_eq!(
            money_in(-2_040_000.0, "XTS", Style::Return),
            "XTS \u{2212}2,040,000"
        );
    }
}
