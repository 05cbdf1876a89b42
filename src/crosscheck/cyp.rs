//! Couple-years of protection (CYP): how much contraceptive protection one
//! unit of a method gives, and from it the units one user needs a year.
//!
//! One CYP is one year of protection for one couple. A table gives each
//! method's **CYP per unit** (per insertion for long-acting methods, per
//! cycle, dose or piece for the others). Then
//!
//! ```text
//! units per user per year = 1 / (CYP per unit)
//! ```
//!
//! For short-acting methods that is the published "units per CYP" (15
//! pill cycles, 120 condoms, 4 injections); for long-acting methods it is
//! insertions per user-year (1 / 2.5 = 0.4 for a 3-year implant): the CYP
//! credited to an insertion is the protection it gives over its use, so a
//! user protected for a year accounts for 1/CYP of an insertion.
//!
//! The default table is [`usaid_2021`]; a user's file can replace or add
//! methods ([`CypTable::with_overrides`]).

/// Source of the default table, as named in outputs.
pub const USAID_2021_SOURCE: &str = "USAID CYP conversion factors, updated August 2021";

/// One method's conversion factor.
#[derive(Debug, Clone, PartialEq)]
pub struct CypFactor {
    /// Method key as written in the population file (`condom`, `implant-3-year`, ...).
    pub method: String,
    /// CYP per unit (per insertion, cycle, dose or piece).
    pub cyp_per_unit: f64,
    /// What a unit is ("insertion", "cycle", ...).
    pub unit: String,
    /// Where the factor comes from.
    pub source: String,
}

impl CypFactor {
    /// Units one user needs per year: 1 / CYP per unit.
    pub fn units_per_user_year(&self) -> f64 {
        1.0 / self.cyp_per_unit
    }
}

/// A CYP conversion table.
#[derive(Debug, Clone, PartialEq)]
pub struct CypTable {
    /// The factors, one per method key.
    pub factors: Vec<CypFactor>,
}

/// The default table: USAID CYP conversion factors, updated August 2021.
/// Long-acting methods are stated as CYP per insertion; short-acting ones
/// as units per CYP (the values of the 2011 table, kept since), stored here
/// as 1 / units per CYP.
pub fn usaid_2021() -> CypTable {
    let f = |method: &str, cyp: f64, unit: &str| CypFactor {
        method: method.into(),
        cyp_per_unit: cyp,
        unit: unit.into(),
        source: USAID_2021_SOURCE.into(),
    };
    CypTable {
        factors: vec![
            f("iud-copper", 4.6, "insertion"),
            f("implant-3-year", 2.5, "insertion"),
            f("implant-4-year", 3.2, "insertion"),
            f("implant-5-year", 3.8, "insertion"),
            f("oral-pill", 1.0 / 15.0, "cycle"),
            f("condom", 1.0 / 120.0, "piece"),
            f("injectable-3-month", 1.0 / 4.0, "dose"),
            f("emergency-contraception", 1.0 / 20.0, "dose"),
        ],
    }
}

impl CypTable {
    /// The factor of a method key (case-insensitive).
    pub fn get(&self, method: &str) -> Option<&CypFactor> {
        let m = method.trim().to_ascii_lowercase();
        self.factors.iter().find(|f| f.method == m)
    }

    /// Method keys, for messages.
    pub fn keys(&self) -> String {
        self.factors
            .iter()
            .map(|f| f.method.as_str())
            .collect::<Vec<_>>()
            .join(", ")
    }

    /// CYP given by `units` of `method`; `None` for an unknown method.
    pub fn cyp(&self, method: &str, units: f64) -> Option<f64> {
        self.get(method).map(|f| units * f.cyp_per_unit)
    }

    /// This table with `overrides` replacing methods of the same key and
    /// adding new ones.
    pub fn with_overrides(mut self, overrides: Vec<CypFactor>) -> CypTable {
        for o in overrides {
            match self.factors.iter_mut().find(|f| f.method == o.method) {
                Some(f) => *f = o,
                None => self.factors.push(o),
            }
        }
        self
    }
}
