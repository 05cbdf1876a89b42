//! Gap-free monthly series built from accepted rows.

use std::collections::BTreeMap;

use super::InputRow;
use crate::calendar::YearMonth;

/// What one row said about one month of one series. A month with no row is
/// `MonthObs::default()` (nothing known), never zero.
#[derive(Debug, Clone, Copy, Default, PartialEq)]
pub struct MonthObs {
    /// Input line of the row, `None` when the month had no row.
    pub line: Option<u64>,
    /// Quantity dispensed, `None` when not reported.
    pub consumed: Option<f64>,
    /// Days out of stock, `None` when not given.
    pub stockout_days: Option<f64>,
    /// Reporting rate as a fraction, `None` when not given.
    pub reporting_rate: Option<f64>,
}

/// One series (a product, or a product at one site) on a gap-free calendar
/// from its first to its last row.
#[derive(Debug, Clone, PartialEq)]
pub struct SiteSeries {
    /// Site name, `None` for files without a site column.
    pub site: Option<String>,
    /// Month of the first row.
    pub start: YearMonth,
    /// One entry per month from `start`, without gaps.
    pub months: Vec<MonthObs>,
}

impl SiteSeries {
    /// Month of the last entry.
    pub fn end(&self) -> YearMonth {
        self.start.plus(self.months.len() as i64 - 1)
    }
}

/// All series of one product.
#[derive(Debug, Clone, PartialEq)]
pub struct ProductData {
    /// Product code or name.
    pub product: String,
    /// Earliest month of any of its series.
    pub start: YearMonth,
    /// Latest month of any of its series.
    pub end: YearMonth,
    /// One series per site (a single series with `site: None` when the file
    /// has no site column), ordered by site name.
    pub sites: Vec<SiteSeries>,
}

impl ProductData {
    /// Number of calendar months from `start` to `end` inclusive.
    pub fn len(&self) -> usize {
        (self.start.months_until(self.end) + 1) as usize
    }

    /// Always false: a product exists only with at least one row.
    pub fn is_empty(&self) -> bool {
        false
    }
}

/// Groups rows into products and sites (ordered by name) and lays each on a
/// gap-free monthly calendar. Rows must already be free of duplicate keys.
pub fn build_series(rows: &[InputRow]) -> Vec<ProductData> {
    let mut grouped: BTreeMap<&str, BTreeMap<Option<&str>, Vec<&InputRow>>> = BTreeMap::new();
    for r in rows {
        grouped
            .entry(&*r.product)
            .or_default()
            .entry(r.site.as_deref())
            .or_default()
            .push(r);
    }
    grouped
        .into_iter()
        .map(|(product, sites)| {
            let mut series = Vec::with_capacity(sites.len());
            for (site, rs) in sites {
                let start = rs
                    .iter()
                    .map(|r| r.month)
                    .min()
                    .unwrap_or_else(|| rs[0].month);
                let end = rs.iter().map(|r| r.month).max().unwrap_or(start);
                let mut months = vec![MonthObs::default(); (start.months_until(end) + 1) as usize];
                for r in rs {
                    months[start.months_until(r.month) as usize] = MonthObs {
                        line: Some(r.line),
                        consumed: r.consumed,
                        stockout_days: r.stockout_days,
                        reporting_rate: r.reporting_rate,
                    };
                }
                series.push(SiteSeries {
                    site: site.map(str::to_string),
                    start,
                    months,
                });
            }
            let start = series
                .iter()
                .map(|s| s.start)
                .min()
                .unwrap_or_else(|| series[0].start);
            let end = series.iter().map(|s| s.end()).max().unwrap_or(start);
            ProductData {
                product: product.to_string(),
                start,
                end,
                sites: series,
            }
        })
        .collect()
}

#[cfg(test)]
mod tests {
    use super::*;

    fn row(line: u64, product: &str, site: Option<&str>, month: &str, c: Option<f64>) -> InputRow {
        InputRow {
            line,
            product: product.into(),
            site: site.map(Into::into),
            month: YearMonth::parse(month).unwrap(),
            consumed: c,
            stockout_days: None,
            reporting_rate: None,
        }
    }

    #[test]
    fn missing_month_is_none_not_zero() {
        let rows = vec![
            row(2, "A", None, "2024-01", Some(5.0)),
            row(3, "A", None, "2024-04", Some(0.0)),
        ];
        let p = &build_series(&rows)[0];
        assert_eq!(p.len(), 4);
        let s = &p.sites[0];
        assert_eq!(s.months[1].consumed, None);
        assert_eq!(s.months[1].line, None);
        assert_eq!(s.months[3].consumed, Some(0.0));
    }

    #[test]
    fn sites_grouped_and_product_span_is_union() {
        let rows = vec![
            row(2, "B", Some("x"), "2024-02", Some(1.0)),
            row(3, "A", Some("y"), "2024-01", Some(1.0)),
            row(4, "A", Some("x"), "2024-03", Some(1.0)),
        ];
        let ps = build_series(&rows);
        assert_eq!(ps[0].product, "A");
        assert_eq!(ps[0].sites.len(), 2);
        assert_eq!(ps[0].sites[0].site.as_deref(), Some("x"));
        assert_eq!(ps[0].len(), 3);
    }
}
