//! Population-based estimates: morbidity and demographic methods.
//!
//! Each input row is one product and one target group (a weight band, an
//! age group, a method's users); a product's estimate is the sum over its
//! rows of the same method.
//!
//! **Morbidity** (per row):
//!
//! ```text
//! courses  = population × group_share × rate × care_seeking × treated
//! quantity = courses × quantity_per_course × (1 + loss_allowance)
//! ```
//!
//! `rate` is the incidence (episodes per person per year) or, for chronic
//! conditions, the prevalence; `group_share` the share of the cases in this
//! group (e.g. a weight band; 1 when `population` is already the group's).
//!
//! **Demographic** (contraceptives; per row):
//!
//! ```text
//! users    = population × rate × method_share × public_share
//! quantity = users × units_per_user_year × (1 + loss_allowance)
//! ```
//!
//! `population` is the number of women of reproductive age, `rate` the
//! contraceptive prevalence (modern methods), `method_share` the share of
//! users on this method, `public_share` the share of them supplied by the
//! public sector; `units_per_user_year` comes from the CYP table
//! (see [`super::cyp`]) unless the row gives it.

use std::collections::BTreeMap;

use super::Method;

/// The population file as read.
#[derive(Debug, Clone, PartialEq)]
pub struct PopulationData {
    /// The checked rows, in file order.
    pub rows: Vec<PopulationRow>,
    /// SHA-256 of the file.
    pub sha256: String,
    /// Warnings met reading the file (columns not used).
    pub warnings: Vec<String>,
}

/// One row of the population file, checked.
#[derive(Debug, Clone, PartialEq)]
pub struct PopulationRow {
    /// 1-based line in the file.
    pub line: u64,
    /// Product.
    pub product: String,
    /// Target group label (may be empty).
    pub group: String,
    /// Morbidity or demographic.
    pub method: Method,
    /// People in the area (morbidity) or women of reproductive age (demographic).
    pub population: f64,
    /// Share of the population or cases in this group (morbidity; default 1).
    pub group_share: f64,
    /// Incidence or prevalence (morbidity); contraceptive prevalence (demographic).
    pub rate: f64,
    /// Share of cases seeking care (morbidity).
    pub care_seeking: f64,
    /// Share of those seen treated per guidelines (morbidity).
    pub treated: f64,
    /// Units per treatment course (morbidity).
    pub quantity_per_course: f64,
    /// Share of users on this method (demographic).
    pub method_share: f64,
    /// Share supplied by the public sector (demographic; default 1).
    pub public_share: f64,
    /// Units per user per year (demographic), resolved from the CYP table
    /// or given.
    pub units_per_user_year: f64,
    /// Where `units_per_user_year` comes from (CYP method and source, or "given").
    pub units_basis: String,
    /// Share added for losses (default 0).
    pub loss_allowance: f64,
}

impl PopulationRow {
    /// Courses (morbidity) or users (demographic) of this row.
    pub fn people(&self) -> f64 {
        match self.method {
            Method::Demographic => {
                self.population * self.rate * self.method_share * self.public_share
            }
            _ => self.population * self.group_share * self.rate * self.care_seeking * self.treated,
        }
    }

    /// The row's annual quantity, loss allowance included.
    pub fn quantity(&self) -> f64 {
        let per = match self.method {
            Method::Demographic => self.units_per_user_year,
            _ => self.quantity_per_course,
        };
        self.people() * per * (1.0 + self.loss_allowance)
    }

    /// The computation in words, with the numbers (written as the
    /// table beside it writes them: thousands grouped, no trailing zeros).
    pub fn describe(&self) -> String {
        use crate::chart::{fmt_figure as f, fmt_quantity as q};
        let g = if self.group.is_empty() {
            String::new()
        } else {
            format!("{}: ", self.group)
        };
        let loss = if self.loss_allowance > 0.0 {
            format!(" × (1 + {} loss)", f(self.loss_allowance))
        } else {
            String::new()
        };
        match self.method {
            Method::Demographic => {
                let per = f(self.units_per_user_year);
                format!(
                    "{g}{} women × {} prevalence × {} method share × {} public share = {} users × {per} {} per user-year ({}){loss} = {}",
                    f(self.population),
                    f(self.rate),
                    f(self.method_share),
                    f(self.public_share),
                    q(self.people()),
                    crate::chart::units_word(&per),
                    self.units_basis,
                    q(self.quantity())
                )
            }
            _ => format!(
                "{g}{} people × {} group share × {} rate × {} seeking care × {} treated = {} courses × {} per course{loss} = {}",
                f(self.population),
                f(self.group_share),
                f(self.rate),
                f(self.care_seeking),
                f(self.treated),
                q(self.people()),
                f(self.quantity_per_course),
                q(self.quantity())
            ),
        }
    }
}

/// A product's population estimate by one method: the sum over its groups.
#[derive(Debug, Clone, PartialEq)]
pub struct PopulationEstimate {
    /// Product.
    pub product: String,
    /// Morbidity or demographic.
    pub method: Method,
    /// Annual quantity.
    pub quantity: f64,
    /// Courses (morbidity) or users (demographic), summed.
    pub people: f64,
    /// One description per group.
    pub groups: Vec<String>,
}

/// Sums rows per product and method, in product order.
pub fn estimates(rows: &[PopulationRow]) -> Vec<PopulationEstimate> {
    let mut by: BTreeMap<(String, Method), PopulationEstimate> = BTreeMap::new();
    for r in rows {
        let e = by
            .entry((r.product.clone(), r.method))
            .or_insert_with(|| PopulationEstimate {
                product: r.product.clone(),
                method: r.method,
                quantity: 0.0,
                people: 0.0,
                groups: Vec::new(),
            });
        e.quantity += r.quantity();
        e.people += r.people();
        e.groups.push(r.describe());
    }
    by.into_values().collect()
}
