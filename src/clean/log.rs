//! The adjustment log: every change cleaning makes, with its reason.

use std::sync::Arc;

use super::impute::ImputeMethod;
use crate::calendar::YearMonth;

/// The rule behind an adjustment.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash, PartialOrd, Ord)]
pub enum Rule {
    /// Scaled up for days out of stock.
    StockoutScaled,
    /// Out of stock too long to trust; treated as missing.
    StockoutMissing,
    /// Scaled up for incomplete reporting.
    ReportingScaled,
    /// Reporting rate below the floor; treated as missing.
    ReportingMissing,
    /// A site's missing month filled from that site's own history.
    SiteFilled,
    /// A missing month of the product total filled.
    Imputed,
    /// Flagged as an outlier; value kept.
    OutlierFlagged,
    /// Flagged as an outlier and replaced (only on request).
    OutlierReplaced,
    /// A duplicate row's quantity added to the first row of its product,
    /// site and month (only on request).
    DuplicateSummed,
}

impl Rule {
    /// Stable name used in output files.
    pub fn name(self) -> &'static str {
        match self {
            Rule::StockoutScaled => "stockout-scaled",
            Rule::StockoutMissing => "stockout-missing",
            Rule::ReportingScaled => "reporting-scaled",
            Rule::ReportingMissing => "reporting-missing",
            Rule::SiteFilled => "site-filled",
            Rule::Imputed => "imputed",
            Rule::OutlierFlagged => "outlier-flagged",
            Rule::OutlierReplaced => "outlier-replaced",
            Rule::DuplicateSummed => "duplicate-summed",
        }
    }

    /// All rules, in pipeline order.
    pub const ALL: [Rule; 9] = [
        Rule::DuplicateSummed,
        Rule::StockoutScaled,
        Rule::StockoutMissing,
        Rule::ReportingScaled,
        Rule::ReportingMissing,
        Rule::SiteFilled,
        Rule::Imputed,
        Rule::OutlierFlagged,
        Rule::OutlierReplaced,
    ];

    /// Whether the rule changes a value (flags do not).
    pub fn changes_value(self) -> bool {
        self != Rule::OutlierFlagged
    }
}

/// Why a missing month had to be filled.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum FillCause {
    /// The month had no row.
    NoRow,
    /// A row was there but gave no quantity.
    NotReported,
    /// The quantity was set aside by an earlier step (stockout, reporting).
    TreatedMissing,
    /// No site of the product covers the month (product total only).
    NoSiteCovers,
}

impl FillCause {
    fn text(self) -> &'static str {
        match self {
            FillCause::NoRow => "no row for this month",
            FillCause::NotReported => "quantity not reported",
            FillCause::TreatedMissing => "value treated as missing above",
            FillCause::NoSiteCovers => "no site covers this month",
        }
    }
}

/// The rule behind an adjustment with the numbers it used: the log's text
/// is formatted from these only when it is written, so an entry holds no
/// text of its own.
#[derive(Debug, Clone, Copy, PartialEq)]
pub enum Reason {
    /// Out of stock too many days: `days_out` of the month's days, against
    /// the `limit` in force for the product.
    StockoutMissing {
        /// Days out of stock.
        days_out: f64,
        /// The stockout-days limit applied.
        limit: f64,
    },
    /// Scaled up for `days_out` days out of stock (the value scaled is the
    /// entry's `before`).
    StockoutScaled {
        /// Days out of stock.
        days_out: f64,
    },
    /// Reporting `rate` below the `floor`.
    ReportingMissing {
        /// Reporting rate, a fraction.
        rate: f64,
        /// The floor applied, a fraction.
        floor: f64,
    },
    /// Scaled up for reporting `rate` (the value scaled is the entry's
    /// `before`), non-reporting facilities weighted by `weight`.
    ReportingScaled {
        /// Reporting rate, a fraction.
        rate: f64,
        /// Weight given to non-reporting facilities.
        weight: f64,
    },
    /// Found to be an outlier: `score` interquartile ranges from the usual
    /// spread (limit `limit`), `expected` from neighbouring months; kept,
    /// or `replaced` on request.
    Outlier {
        /// Signed score in interquartile ranges.
        score: f64,
        /// The threshold applied.
        limit: f64,
        /// Value expected from neighbouring months.
        expected: f64,
        /// Whether the value was replaced (otherwise only flagged).
        replaced: bool,
    },
    /// A site's missing month filled from that site's own history.
    SiteFilled {
        /// Why the month was missing.
        cause: FillCause,
        /// How it was filled.
        method: ImputeMethod,
    },
    /// A missing month of the product total (or a file without sites) filled.
    Imputed {
        /// Why the month was missing.
        cause: FillCause,
        /// How it was filled.
        method: ImputeMethod,
    },
    /// This row's quantity added to the row on `into_line` (the entry's
    /// `before` and `after` are that row's quantity before and after).
    DuplicateSummed {
        /// Line of the row that carries the sum.
        into_line: u64,
    },
}

impl Reason {
    /// The rule this reason belongs to.
    pub fn rule(&self) -> Rule {
        match self {
            Reason::StockoutMissing { .. } => Rule::StockoutMissing,
            Reason::StockoutScaled { .. } => Rule::StockoutScaled,
            Reason::ReportingMissing { .. } => Rule::ReportingMissing,
            Reason::ReportingScaled { .. } => Rule::ReportingScaled,
            Reason::Outlier {
                replaced: false, ..
            } => Rule::OutlierFlagged,
            Reason::Outlier { replaced: true, .. } => Rule::OutlierReplaced,
            Reason::SiteFilled { .. } => Rule::SiteFilled,
            Reason::Imputed { .. } => Rule::Imputed,
            Reason::DuplicateSummed { .. } => Rule::DuplicateSummed,
        }
    }
}

/// A quantity as the log writes it: whole numbers without decimals,
/// others with two.
pub(crate) fn fmt_q(v: f64) -> String {
    if v.fract() == 0.0 && v.abs() < 1e15 {
        format!("{v:.0}")
    } else {
        format!("{v:.2}")
    }
}

/// One entry of the adjustment log. Names are shared with the product's
/// other entries and the reason is kept as numbers (about 120 bytes an
/// entry): on a national file the log has millions of entries.
#[derive(Debug, Clone, PartialEq)]
pub struct Adjustment {
    /// Product.
    pub product: Arc<str>,
    /// Site, `None` for the product total (or files without sites).
    pub site: Option<Arc<str>>,
    /// Month adjusted.
    pub month: YearMonth,
    /// Input line of the row concerned, `None` when the month had no row.
    pub line: Option<u64>,
    /// Value before this step (`None` = missing).
    pub before: Option<f64>,
    /// Value after this step (`None` = missing).
    pub after: Option<f64>,
    /// Rule applied, with the numbers used.
    pub why: Reason,
}

impl Adjustment {
    /// Change in quantity this step made, missing counted as zero. Rows
    /// summed while reading move a quantity of the file from one row to
    /// another: the product's volume is unchanged, so their change is zero
    /// (their `before` and `after` show the receiving row's value).
    pub fn delta(&self) -> f64 {
        if self.rule() == Rule::DuplicateSummed {
            return 0.0;
        }
        self.row_delta()
    }

    /// Change in the value of the row concerned.
    fn row_delta(&self) -> f64 {
        self.after.unwrap_or(0.0) - self.before.unwrap_or(0.0)
    }

    /// Rule applied.
    pub fn rule(&self) -> Rule {
        self.why.rule()
    }

    /// Plain-words reason, with the numbers used (formatted on each call:
    /// see [`Adjustment::write_reason`] to reuse a buffer).
    pub fn reason(&self) -> String {
        let mut s = String::new();
        self.write_reason(&mut s);
        s
    }

    /// Appends the plain-words reason to `out`.
    pub fn write_reason(&self, out: &mut String) {
        // Writing to a String cannot fail.
        let _ = self.format_reason(out);
    }

    fn format_reason(&self, out: &mut String) -> std::fmt::Result {
        use std::fmt::Write;
        let days = self.month.days();
        let v = self.before.unwrap_or(0.0);
        match self.why {
            Reason::StockoutMissing { days_out, limit } => write!(
                out,
                "out of stock {} of {days} days (limit {}): consumption does not show demand; treated as missing",
                fmt_q(days_out),
                fmt_q(limit)
            ),
            Reason::StockoutScaled { days_out } => write!(
                out,
                "out of stock {} of {days} days: {} × {days} ÷ {}",
                fmt_q(days_out),
                fmt_q(v),
                fmt_q(days as f64 - days_out)
            ),
            Reason::ReportingMissing { rate, floor } => write!(
                out,
                "reporting rate {:.0}% is below the floor {:.0}%: too few reports to trust; treated as missing",
                rate * 100.0,
                floor * 100.0
            ),
            Reason::ReportingScaled { rate, weight } => {
                write!(out, "reporting rate {:.1}%: ", rate * 100.0)?;
                if weight == 1.0 {
                    write!(out, "{} ÷ {:.4}", fmt_q(v), rate)
                } else {
                    write!(out, "{0} + {0} × (1/{1:.4} − 1) × {2}", fmt_q(v), rate, weight)
                }
            }
            Reason::Outlier {
                score,
                limit,
                expected,
                replaced,
            } => write!(
                out,
                "{:.1} interquartile ranges {} the usual spread of the seasonal decomposition's remainder (limit {:.1}); expected about {} from neighbouring months; {}",
                score.abs(),
                if score > 0.0 { "above" } else { "below" },
                limit,
                fmt_q(expected),
                if replaced {
                    "replaced on request"
                } else {
                    "kept (replace only on request)"
                }
            ),
            Reason::SiteFilled { cause, method } => write!(
                out,
                "{}; site '{}' filled from its own history by {}",
                cause.text(),
                self.site.as_deref().unwrap_or(""),
                method.describe()
            ),
            Reason::Imputed { cause, method } => {
                write!(out, "{}; filled by {}", cause.text(), method.describe())
            }
            Reason::DuplicateSummed { into_line } => write!(
                out,
                "same product, site and month as line {into_line}: its quantity {} added there ({} + {} = {}) on request (--duplicates sum)",
                fmt_q(self.row_delta()),
                self.before.map_or("missing".to_string(), fmt_q),
                fmt_q(self.row_delta()),
                self.after.map_or("missing".to_string(), fmt_q),
            ),
        }
    }
}

/// The adjustment log of a run: each product's entries (in site and month
/// order) as cleaning made them, products in order. Kept in one part per
/// product rather than copied into one list, which on a national file
/// would hold the whole log twice at its peak.
#[derive(Debug, Clone, Default, PartialEq)]
pub struct AdjustmentLog {
    parts: Vec<Vec<Adjustment>>,
    len: usize,
}

impl AdjustmentLog {
    /// Adds one product's entries after the others.
    pub fn push_product(&mut self, mut entries: Vec<Adjustment>) {
        if entries.is_empty() {
            return;
        }
        entries.shrink_to_fit();
        self.len += entries.len();
        self.parts.push(entries);
    }

    /// Every entry, in order.
    pub fn iter(&self) -> impl DoubleEndedIterator<Item = &Adjustment> + Clone + '_ {
        self.parts.iter().flatten()
    }

    /// Number of entries.
    pub fn len(&self) -> usize {
        self.len
    }

    /// True when nothing was adjusted.
    pub fn is_empty(&self) -> bool {
        self.len == 0
    }

    /// Each product's entries as one slice, products in order (a product
    /// without entries has none).
    pub fn by_product(&self) -> impl Iterator<Item = &[Adjustment]> + '_ {
        self.parts.iter().map(Vec::as_slice)
    }
}

impl<'a> IntoIterator for &'a AdjustmentLog {
    type Item = &'a Adjustment;
    type IntoIter = std::iter::Flatten<std::slice::Iter<'a, Vec<Adjustment>>>;

    fn into_iter(self) -> Self::IntoIter {
        self.parts.iter().flatten()
    }
}
