//! Year-month arithmetic: the monthly calendar every series lives on.

use std::fmt;

/// First year accepted in input data.
pub const MIN_YEAR: i32 = 1900;
/// Last year accepted in input data.
pub const MAX_YEAR: i32 = 2100;

/// A calendar month, e.g. 2024-03. Ordered chronologically.
#[derive(Debug, Clone, Copy, PartialEq, Eq, PartialOrd, Ord, Hash)]
pub struct YearMonth {
    year: i32,
    month: u32,
}

impl YearMonth {
    /// Builds a month; `None` when `month` is not 1–12 or the year is outside
    /// [`MIN_YEAR`]..=[`MAX_YEAR`].
    pub fn new(year: i32, month: u32) -> Option<Self> {
        if (1..=12).contains(&month) && (MIN_YEAR..=MAX_YEAR).contains(&year) {
            Some(YearMonth { year, month })
        } else {
            None
        }
    }

    /// Builds a month known to be valid at compile time (for constants).
    /// `month` outside 1–12 is clamped into range.
    pub const fn known(year: i32, month: u32) -> Self {
        let month = if month < 1 {
            1
        } else if month > 12 {
            12
        } else {
            month
        };
        YearMonth { year, month }
    }

    /// The year.
    pub fn year(self) -> i32 {
        self.year
    }

    /// The month of the year, 1–12.
    pub fn month(self) -> u32 {
        self.month
    }

    /// Months since January of year 0; a dense index for arithmetic.
    pub fn index(self) -> i64 {
        self.year as i64 * 12 + (self.month as i64 - 1)
    }

    /// The month `n` months later (earlier when negative). Not range-checked,
    /// so forecasts may run past [`MAX_YEAR`].
    pub fn plus(self, n: i64) -> Self {
        let i = self.index() + n;
        YearMonth {
            year: i.div_euclid(12) as i32,
            month: (i.rem_euclid(12) + 1) as u32,
        }
    }

    /// Number of months from `self` to `later` (negative when `later` is earlier).
    pub fn months_until(self, later: YearMonth) -> i64 {
        later.index() - self.index()
    }

    /// Days in this month, with Gregorian leap years.
    pub fn days(self) -> u32 {
        days_in_month(self.year, self.month)
    }

    /// Parses `YYYY-MM` or `YYYY-MM-DD` (the day is checked, then ignored).
    /// The error text says what was wrong.
    pub fn parse(text: &str) -> Result<Self, String> {
        let t = text.trim();
        let parts: Vec<&str> = t.split('-').collect();
        let valid = "expected YYYY-MM (e.g. 2024-03) or YYYY-MM-DD (e.g. 2024-03-01)";
        if parts.len() != 2 && parts.len() != 3 {
            return Err(format!("month \"{t}\" is not a valid month; {valid}"));
        }
        let digits = |s: &str, n: usize| s.len() == n && s.bytes().all(|b| b.is_ascii_digit());
        if !digits(parts[0], 4)
            || !digits(parts[1], 2)
            || (parts.len() == 3 && !digits(parts[2], 2))
        {
            return Err(format!("month \"{t}\" is not a valid month; {valid}"));
        }
        let year: i32 = parts[0]
            .parse()
            .map_err(|_| format!("month \"{t}\": bad year; {valid}"))?;
        let month: u32 = parts[1]
            .parse()
            .map_err(|_| format!("month \"{t}\": bad month; {valid}"))?;
        if !(1..=12).contains(&month) {
            return Err(format!("month \"{t}\": month {month} is not 1-12; {valid}"));
        }
        if !(MIN_YEAR..=MAX_YEAR).contains(&year) {
            return Err(format!(
                "month \"{t}\": year {year} is outside {MIN_YEAR}-{MAX_YEAR}"
            ));
        }
        if parts.len() == 3 {
            let day: u32 = parts[2]
                .parse()
                .map_err(|_| format!("month \"{t}\": bad day; {valid}"))?;
            let dim = days_in_month(year, month);
            if day == 0 || day > dim {
                return Err(format!(
                    "date \"{t}\": day {day} does not exist ({year}-{month:02} has {dim} days)"
                ));
            }
        }
        Ok(YearMonth { year, month })
    }
}

impl fmt::Display for YearMonth {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        write!(f, "{:04}-{:02}", self.year, self.month)
    }
}

/// A set of months in words, with their count, so the count and the range
/// cannot be misread: "1 month: 2026-12", "3 months: 2026-12 to 2027-02"
/// (consecutive), "2 months: 2026-12, 2027-02" (not consecutive, up to
/// four listed), "5 of the 9 months 2026-12 to 2027-08" (more, with gaps).
/// `months` is in order; empty gives "no month".
pub fn describe_months(months: &[YearMonth]) -> String {
    let (Some(&a), Some(&z)) = (months.first(), months.last()) else {
        return "no month".to_string();
    };
    let n = months.len();
    let span = a.months_until(z) + 1;
    if n == 1 {
        format!("1 month: {a}")
    } else if span == n as i64 {
        format!("{n} months: {a} to {z}")
    } else if n <= 4 {
        let list: Vec<String> = months.iter().map(|m| m.to_string()).collect();
        format!("{n} months: {}", list.join(", "))
    } else {
        format!("{n} of the {span} months {a} to {z}")
    }
}

/// Gregorian leap year.
pub fn is_leap_year(year: i32) -> bool {
    (year % 4 == 0 && year % 100 != 0) || year % 400 == 0
}

/// Days in a month (1–12) of a year; 0 for an invalid month.
pub fn days_in_month(year: i32, month: u32) -> u32 {
    match month {
        1 | 3 | 5 | 7 | 8 | 10 | 12 => 31,
        4 | 6 | 9 | 11 => 30,
        2 if is_leap_year(year) => 29,
        2 => 28,
        _ => 0,
    }
}

/// Average days per month used by the published period form of the
/// stockout adjustment (365.25 / 12 ≈ 30.4).
pub const AVERAGE_DAYS_PER_MONTH: f64 = 30.4;

#[cfg(test)]
mod tests {
    #[test]
    fn months_described_with_count_and_range_that_agree() {
        let m = |y, mo| YearMonth::known(y, mo);
        assert_eq!(describe_months(&[]), "no month");
        assert_eq!(describe_months(&[m(2026, 12)]), "1 month: 2026-12");
        // Two months with a gap are listed, never written as a range that
        // reads as three.
        assert_eq!(
            describe_months(&[m(2026, 12), m(2027, 2)]),
            "2 months: 2026-12, 2027-02"
        );
        assert_eq!(
            describe_months(&[m(2026, 12), m(2027, 1), m(2027, 2)]),
            "3 months: 2026-12 to 2027-02"
        );
        let gappy: Vec<_> = [1, 2, 4, 6, 9].iter().map(|&x| m(2027, x)).collect();
        assert_eq!(
            describe_months(&gappy),
            "5 of the 9 months 2027-01 to 2027-09"
        );
    }

    use super::*;
    use chrono::NaiveDate;

    // Reference: chrono 0.4 (general-purpose date library), every month 1900–2100.
    #[test]
    fn days_in_month_matches_chrono_1900_2100() {
        for year in MIN_YEAR..=MAX_YEAR {
            for month in 1..=12u32 {
                let first = NaiveDate::from_ymd_opt(year, month, 1).unwrap();
                let next = if month == 12 {
                    NaiveDate::from_ymd_opt(year + 1, 1, 1).unwrap()
                } else {
                    NaiveDate::from_ymd_opt(year, month + 1, 1).unwrap()
                };
                let expected = (next - first).num_days() as u32;
                assert_eq!(days_in_month(year, month), expected, "{year}-{month}");
                assert_eq!(is_leap_year(year), first.leap_year(), "{year}");
            }
        }
    }

    #[test]
    fn leap_year_rules() {
        // Gregorian rules: 1900 and 2100 are not leap years, 2000 is.
        assert!(!is_leap_year(1900));
        assert!(is_leap_year(2000));
        assert!(!is_leap_year(2100));
        assert!(is_leap_year(2024));
    }

    #[test]
    fn parse_forms() {
        let m = YearMonth::parse("2024-03").unwrap();
        assert_eq!((m.year(), m.month()), (2024, 3));
        assert_eq!(YearMonth::parse("2024-03-15").unwrap(), m);
        assert_eq!(YearMonth::parse(" 2024-03 ").unwrap(), m);
        for bad in [
            "2024/03",
            "Mar-2024",
            "03/2024",
            "2024-13",
            "2024-3",
            "1899-12",
            "2101-01",
            "2023-02-29",
            "",
        ] {
            assert!(YearMonth::parse(bad).is_err(), "{bad} should be refused");
        }
        assert!(YearMonth::parse("2024-02-29").is_ok());
    }

    #[test]
    fn arithmetic() {
        let m = YearMonth::new(2023, 11).unwrap();
        assert_eq!(m.plus(2).to_string(), "2024-01");
        assert_eq!(m.plus(-11).to_string(), "2022-12");
        assert_eq!(m.months_until(m.plus(25)), 25);
    }
}
