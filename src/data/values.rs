//! Parsing one value: numbers in the format the user declared, and months,
//! with messages that say what would be valid.

use crate::calendar::YearMonth;

/// How numbers are written in the input file.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default)]
pub enum NumberFormat {
    /// `1234` or `1234.5`: a point as decimal mark, no thousands separator.
    #[default]
    Plain,
    /// `1,234.5` or `1 234.5`: a point as decimal mark; commas or spaces
    /// between groups of three digits.
    Grouped,
    /// `1234,5`, `1.234,5` or `1 234,5`: a comma as decimal mark; points or
    /// spaces between groups of three digits.
    DecimalComma,
}

impl NumberFormat {
    /// The name used on the command line and in the manifest.
    pub fn name(self) -> &'static str {
        match self {
            NumberFormat::Plain => "plain",
            NumberFormat::Grouped => "grouped",
            NumberFormat::DecimalComma => "decimal-comma",
        }
    }

    fn example(self) -> &'static str {
        match self {
            NumberFormat::Plain => "1250 or 1250.5 (point as decimal mark, no thousands separator)",
            NumberFormat::Grouped => "1250, 1,250.5 or 1 250.5 (point as decimal mark; comma or space between groups of three digits)",
            NumberFormat::DecimalComma => "1250, 1250,5, 1.250,5 or 1 250,5 (comma as decimal mark; point or space between groups of three digits)",
        }
    }
}

/// Space characters used between digit groups: space, no-break space,
/// narrow no-break space.
fn is_group_space(c: char) -> bool {
    matches!(c, ' ' | '\u{a0}' | '\u{202f}')
}

/// Parses a number written in `format`; empty is `None`. Refuses
/// infinities, NaN, and separators the format does not allow, naming the
/// `--numbers` choice that would read the value.
pub fn parse_number(text: &str, format: NumberFormat) -> Result<Option<f64>, String> {
    let t = text.trim();
    if t.is_empty() {
        return Ok(None);
    }
    // Built only for a message: this runs for every number in the file.
    let valid = || {
        format!(
            "expected a number such as {}, or empty for not reported",
            format.example()
        )
    };
    let plain = match format {
        NumberFormat::Plain => {
            if t.contains(',') {
                return Err(format!(
                    "\"{t}\" has a comma (decimal comma or thousands separator); {}; \
                     for a decimal comma use --numbers decimal-comma, for thousands separators --numbers grouped",
                    valid()
                ));
            }
            if t.chars().any(is_group_space) {
                return Err(format!(
                    "\"{t}\" has a space inside (thousands separator?); {}; \
                     to read spaces between digit groups use --numbers grouped (or decimal-comma)",
                    valid()
                ));
            }
            if t.matches('.').count() > 1 {
                return Err(format!(
                    "\"{t}\" has more than one point (points between thousands?); {}; \
                     for 1.234,5 style numbers use --numbers decimal-comma",
                    valid()
                ));
            }
            std::borrow::Cow::Borrowed(t)
        }
        NumberFormat::Grouped => std::borrow::Cow::Owned(
            ungroup(t, '.', &[',', ' ', '\u{a0}', '\u{202f}'])
                .map_err(|why| format!("\"{t}\": {why}; {}", valid()))?,
        ),
        NumberFormat::DecimalComma => std::borrow::Cow::Owned(
            ungroup(t, ',', &['.', ' ', '\u{a0}', '\u{202f}'])
                .map_err(|why| format!("\"{t}\": {why}; {}", valid()))?,
        ),
    };
    let ok_chars = plain
        .bytes()
        .all(|b| b.is_ascii_digit() || matches!(b, b'.' | b'-' | b'+' | b'e' | b'E'));
    match plain.parse::<f64>() {
        Ok(v) if ok_chars && v.is_finite() => Ok(Some(v)),
        _ => Err(format!("\"{t}\" is not a number; {}", valid())),
    }
}

/// Rewrites a grouped number (`decimal` as decimal mark, any one of `seps`
/// between groups of three digits) in plain form, checking the grouping.
fn ungroup(t: &str, decimal: char, seps: &[char]) -> Result<String, String> {
    let (sign, body) = match t.strip_prefix(['-', '+']) {
        Some(rest) => (&t[..1], rest),
        None => ("", t),
    };
    if body.matches(decimal).count() > 1 {
        return Err(format!("more than one decimal mark '{decimal}'"));
    }
    let (int, frac) = match body.split_once(decimal) {
        Some((i, f)) => (i, Some(f)),
        None => (body, None),
    };
    let used: Vec<char> = seps.iter().copied().filter(|s| int.contains(*s)).collect();
    let mut out = String::with_capacity(t.len());
    out.push_str(sign);
    match used.as_slice() {
        [] => out.push_str(int),
        [sep] => {
            let groups: Vec<&str> = int.split(*sep).collect();
            let digits = |g: &str| g.bytes().all(|b| b.is_ascii_digit());
            let first_ok = (1..=3).contains(&groups[0].len()) && digits(groups[0]);
            let rest_ok = groups[1..].iter().all(|g| g.len() == 3 && digits(g));
            if !(first_ok && rest_ok) {
                return Err(format!(
                    "'{}' must separate groups of three digits",
                    sep.escape_default()
                ));
            }
            groups.iter().for_each(|g| out.push_str(g));
        }
        _ => return Err("mixes different thousands separators".to_string()),
    }
    if let Some(f) = frac {
        if f.chars().any(|c| seps.contains(&c)) {
            return Err("a thousands separator after the decimal mark".to_string());
        }
        out.push('.');
        out.push_str(f);
    }
    Ok(out)
}

const MONTH_NAMES: [&str; 12] = [
    "january",
    "february",
    "march",
    "april",
    "may",
    "june",
    "july",
    "august",
    "september",
    "october",
    "november",
    "december",
];

/// Parses a month in the accepted forms (`YYYY-MM`, `YYYY-MM-DD`); when the
/// text is an unambiguous month in another form (`2024/03`, `03/2024`,
/// `Mar-2024`, `March 2024`, `202403`), the message says how to write it.
/// Day-month-year dates such as `03/04/2024` get no suggestion: the order
/// of day and month cannot be told.
pub fn parse_month(text: &str) -> Result<YearMonth, String> {
    YearMonth::parse(text).map_err(|message| match suggest_month(text.trim()) {
        Some(m) => format!("{message}; if \"{}\" means {m}, write {m}", text.trim()),
        None => message,
    })
}

fn suggest_month(t: &str) -> Option<YearMonth> {
    let num = |s: &str, n: std::ops::RangeInclusive<usize>| {
        (n.contains(&s.len()) && s.bytes().all(|b| b.is_ascii_digit()))
            .then(|| s.parse::<u32>().ok())
            .flatten()
    };
    let name = |s: &str| {
        let s = s.to_lowercase();
        (s.len() >= 3)
            .then(|| MONTH_NAMES.iter().position(|m| m.starts_with(&s)))
            .flatten()
            .map(|i| i as u32 + 1)
    };
    let parts: Vec<&str> = t
        .split(['/', '-', '.', ' ', '_'])
        .filter(|p| !p.is_empty())
        .collect();
    let (year, month) = match parts.as_slice() {
        // `get`, not slicing: a six-byte text may hold multi-byte characters.
        [a] if a.len() == 6 => (num(a.get(..4)?, 4..=4)?, num(a.get(4..)?, 2..=2)?),
        [a, b] => match (num(a, 4..=4), num(b, 1..=2), num(a, 1..=2), num(b, 4..=4)) {
            (Some(y), Some(m), _, _) => (y, m),
            (_, _, Some(m), Some(y)) => (y, m),
            _ => match (name(a), num(b, 4..=4), num(a, 4..=4), name(b)) {
                (Some(m), Some(y), _, _) => (y, m),
                (_, _, Some(y), Some(m)) => (y, m),
                _ => return None,
            },
        },
        _ => return None,
    };
    YearMonth::new(i32::try_from(year).ok()?, month)
}

/// Reads a column header of the wide layout as a month: every form
/// [`parse_month`] reads or suggests (`2024-03`, `2024-03-01`, `2024/03`,
/// `03/2024`, `Mar 2024`, `March 2024`, `Mar-2024`, `202403`), and a month
/// name with a two-digit year (`Mar-24`, `Mar 24`: 2024), the way
/// spreadsheets show a date cell formatted as month and year. Day-month-year
/// dates (`01/03/2024`) are not read: the order of day and month cannot be
/// told from one header.
pub(crate) fn parse_month_header(text: &str) -> Option<YearMonth> {
    let t = text.trim();
    if let Ok(m) = YearMonth::parse(t) {
        return Some(m);
    }
    if let Some(m) = suggest_month(t) {
        return Some(m);
    }
    let parts: Vec<&str> = t
        .split(['/', '-', '.', ' ', '_', '\''])
        .filter(|p| !p.is_empty())
        .collect();
    match parts.as_slice() {
        [name, yy] if yy.len() == 2 && yy.bytes().all(|b| b.is_ascii_digit()) => {
            let month = month_name(name)?;
            let year: i32 = yy.parse().ok()?;
            YearMonth::new(2000 + year, month)
        }
        _ => None,
    }
}

/// The month number of a month name or its abbreviation (three letters
/// or more: `Mar`, `Sept`, `March`).
fn month_name(s: &str) -> Option<u32> {
    let s = s.to_lowercase();
    (s.chars().count() >= 3 && s.chars().all(char::is_alphabetic))
        .then(|| MONTH_NAMES.iter().position(|m| m.starts_with(&s)))
        .flatten()
        .map(|i| i as u32 + 1)
}

/// Whether a column header that is not read as a month was probably meant
/// as one: it holds a month name, or a year 1900-2100 with another number
/// or a word that starts like a month name (`Febuary 2024`).
/// Headers of totals (`Total 2024`) are not.
pub(crate) fn looks_like_month(text: &str) -> bool {
    let t = text.trim().to_lowercase();
    if t.contains("total") || t.contains("sum") || t.contains("average") || t.contains("mean") {
        return false;
    }
    let words: Vec<&str> = t
        .split(|c: char| !c.is_alphanumeric())
        .filter(|p| !p.is_empty())
        .collect();
    // A month name, or a word that starts like one (`Febuary`, `Marhc`).
    let named = words.iter().any(|w| month_name(w).is_some());
    let near_name = words.iter().any(|w| {
        let head: String = w.chars().take(3).collect();
        head.chars().count() == 3
            && head.chars().all(char::is_alphabetic)
            && MONTH_NAMES.iter().any(|m| m.starts_with(&head))
    });
    let year = words
        .iter()
        .any(|w| w.len() == 4 && w.parse::<i32>().is_ok_and(|y| (1900..=2100).contains(&y)));
    let numbers = words
        .iter()
        .filter(|w| w.bytes().all(|b| b.is_ascii_digit()))
        .count();
    named || (year && (near_name || numbers >= 2))
}

#[cfg(test)]
mod tests {
    use super::*;

    fn n(t: &str, f: NumberFormat) -> Result<Option<f64>, String> {
        parse_number(t, f)
    }

    #[test]
    fn plain_numbers_and_refusals_that_name_the_option() {
        assert_eq!(n("1250.5", NumberFormat::Plain), Ok(Some(1250.5)));
        assert_eq!(n(" ", NumberFormat::Plain), Ok(None));
        for (t, hint) in [
            ("1234,5", "--numbers decimal-comma"),
            ("1,234", "--numbers grouped"),
            ("1 234", "--numbers grouped"),
            ("1\u{a0}234", "--numbers grouped"),
            ("1.234.567", "--numbers decimal-comma"),
        ] {
            let e = n(t, NumberFormat::Plain).unwrap_err();
            assert!(e.contains(hint), "{t}: {e}");
        }
        for t in ["NaN", "inf", "-inf", "12a", "0x10", "1_000"] {
            assert!(n(t, NumberFormat::Plain)
                .unwrap_err()
                .contains("is not a number"));
        }
    }

    #[test]
    fn grouped_numbers() {
        let g = NumberFormat::Grouped;
        assert_eq!(n("1,234", g), Ok(Some(1234.0)));
        assert_eq!(n("12,345,678.25", g), Ok(Some(12_345_678.25)));
        assert_eq!(n("1 234.5", g), Ok(Some(1234.5)));
        assert_eq!(n("1\u{202f}234", g), Ok(Some(1234.0)));
        assert_eq!(n("-1,000", g), Ok(Some(-1000.0)));
        assert_eq!(n("999", g), Ok(Some(999.0)));
        assert!(n("1,23", g).unwrap_err().contains("groups of three"));
        assert!(n("1234,567", g).unwrap_err().contains("groups of three"));
        assert!(n("1,234 567", g).unwrap_err().contains("mixes"));
        assert!(n("1.5.2", g).is_err());
    }

    #[test]
    fn decimal_comma_numbers() {
        let d = NumberFormat::DecimalComma;
        assert_eq!(n("1234,5", d), Ok(Some(1234.5)));
        assert_eq!(n("1.234,5", d), Ok(Some(1234.5)));
        assert_eq!(n("1 234 567,25", d), Ok(Some(1_234_567.25)));
        assert_eq!(n("0,8", d), Ok(Some(0.8)));
        assert_eq!(n("12", d), Ok(Some(12.0)));
        // A point with other than three digits after it is not a group.
        assert!(n("1.5", d).unwrap_err().contains("groups of three"));
        assert!(n("1,2,3", d)
            .unwrap_err()
            .contains("more than one decimal mark"));
    }

    #[test]
    fn months_in_other_forms_get_a_suggestion() {
        let m = |t: &str| parse_month(t).unwrap_err();
        for (t, want) in [
            ("2024/03", "2024-03"),
            ("03/2024", "2024-03"),
            ("3/2024", "2024-03"),
            ("Mar-2024", "2024-03"),
            ("March 2024", "2024-03"),
            ("2024 mar", "2024-03"),
            ("202403", "2024-03"),
            ("2024.03", "2024-03"),
        ] {
            let e = m(t);
            assert!(e.contains("expected YYYY-MM"), "{t}: {e}");
            assert!(
                e.contains(&format!("means {want}, write {want}")),
                "{t}: {e}"
            );
        }
        for t in [
            "03/04/2024",
            // Six bytes with a two-byte character at 3..5 (found by fuzzing:
            // cutting it at byte 4 panicked).
            "202\u{9b}1",
            "20é41",
            "Ma-2024",
            "2024/13",
            "1899/12",
            "13/2024",
            "soon",
        ] {
            assert!(!m(t).contains("means"), "{t}: {}", m(t));
        }
        assert_eq!(parse_month("2024-03").unwrap(), YearMonth::known(2024, 3));
    }

    #[test]
    fn month_headers_of_the_wide_layout() {
        let ym = YearMonth::known;
        for (t, want) in [
            ("2024-01", ym(2024, 1)),
            ("2024-01-01", ym(2024, 1)),
            ("Jan 2024", ym(2024, 1)),
            ("January 2024", ym(2024, 1)),
            ("01/2024", ym(2024, 1)),
            ("1/2024", ym(2024, 1)),
            ("2024/01", ym(2024, 1)),
            ("Sept 2023", ym(2023, 9)),
            ("Sep-23", ym(2023, 9)),
            ("mar 24", ym(2024, 3)),
            ("Dec'24", ym(2024, 12)),
            ("202412", ym(2024, 12)),
            (" 2024-02 ", ym(2024, 2)),
        ] {
            assert_eq!(parse_month_header(t), Some(want), "{t}");
        }
        for t in [
            "01/03/2024",
            "Total",
            "product",
            "2024",
            "Febuary 2024",
            "2024-13",
            "Ma 24",
            "45292",
            "",
        ] {
            assert_eq!(parse_month_header(t), None, "{t}");
        }
        // Meant as months, but unreadable: refused, not taken as extra columns.
        for t in ["Febuary 2024", "Marhc 2024", "01/03/2024", "2024-13", "Jan"] {
            assert!(looks_like_month(t), "{t}");
        }
        for t in [
            "Total 2024",
            "unit",
            "code",
            "Grand total",
            "2024",
            "notes",
            "Market",
        ] {
            assert!(!looks_like_month(t), "{t}");
        }
    }
}
