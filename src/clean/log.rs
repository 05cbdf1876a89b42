//! The adjustment log: every change cleaning makes, with its reason.

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
        }
    }

    /// All rules, in pipeline order.
    pub const ALL: [Rule; 8] = [
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

/// One entry of the adjustment log.
#[derive(Debug, Clone, PartialEq)]
pub struct Adjustment {
    /// Product.
    pub product: String,
    /// Site, `None` for the product total (or files without sites).
    pub site: Option<String>,
    /// Month adjusted.
    pub month: YearMonth,
    /// Input line of the row concerned, `None` when the month had no row.
    pub line: Option<u64>,
    /// Value before this step (`None` = missing).
    pub before: Option<f64>,
    /// Value after this step (`None` = missing).
    pub after: Option<f64>,
    /// Rule applied.
    pub rule: Rule,
    /// Plain-words reason, with the numbers used.
    pub reason: String,
}

impl Adjustment {
    /// Change in quantity this step made, missing counted as zero.
    pub fn delta(&self) -> f64 {
        self.after.unwrap_or(0.0) - self.before.unwrap_or(0.0)
    }
}
