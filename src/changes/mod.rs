//! Known changes ahead: programme decisions (a scale-up, a phase-out, a
//! switch between products, a new product, a campaign) applied to the
//! statistical projection, with a trace of every month they changed.
//!
//! The statistical projection is computed as always; the changes are then
//! applied in file order to a copy of it, the *adjusted* forecast. Both are
//! kept. This module is pure: [`read`] reads a changes file, [`apply`]
//! applies its rows to plain values.
//!
//! # Kinds
//!
//! Let `f(k)` be the share of a gradual change in force in month `k`:
//! 0 before `first_month`; `(k − first + 1) / (last − first + 1)` from
//! `first_month` to `last_month` (linear, full in `last_month`); 1 after
//! `last_month`, and 1 from `first_month` on when `last_month` is empty
//! (at once). `y` is the product's forecast before the row is applied.
//!
//! | kind | columns | adjusted forecast |
//! |---|---|---|
//! | `percent-change` | `value` = percent (−100 or more) | `y × (1 + f·value/100)` |
//! | `quantity-per-month` | `value` = units per month (negative removes) | `y + value` from `first_month` to `last_month` (end of the projection when empty) |
//! | `target-level` | `value` = monthly level | `y + f·(value − y)`: the level is reached in `last_month` and held |
//! | `phase-out` | none | `y × (1 − f)`: zero from `last_month` on |
//! | `switch` | `other_product` = B, `value` = percent of A moved (100 when empty), `factor` = units of B per unit of A (1 when empty) | A: `y_A − m`, B: `y_B + factor·m`, where `m = f·value/100·y_A` |
//! | `new-from-analogue` | `other_product` = analogue, `factor` | `y + factor × analogue` from `first_month` on |
//! | `new-from-level` | `start_value`, `value` (optional) | `start_value` in `first_month`, rising linearly to `value` in `last_month`, then held; `start_value` throughout when `value` is empty |
//!
//! # Ranges
//!
//! The 80% and 95% ranges move with the point: a multiplicative change
//! (`percent-change`, `phase-out`, the product a switch moves away from,
//! `target-level` where the forecast was above zero) scales them by the
//! same ratio as the point; an additive change (`quantity-per-month`, the
//! product a switch moves to, `new-from-level`, `target-level` from zero)
//! shifts them by the same quantity; `new-from-analogue` adds the
//! analogue's ranges × the factor. Every value is clipped at zero; a clipped
//! point is reported as a warning. A new product has no statistical range:
//! its ranges start at its (zero) statistical forecast, so a level set by
//! hand has a range of zero width.

pub mod read;
pub mod score;

use std::collections::HashMap;

use crate::calendar::YearMonth;
use crate::error::{Error, Result};

pub use read::{read_changes, ChangesFile};

/// The kinds of change, as written in the `kind` column.
pub const KINDS: [&str; 7] = [
    "percent-change",
    "quantity-per-month",
    "target-level",
    "phase-out",
    "switch",
    "new-from-analogue",
    "new-from-level",
];

/// What a row of the changes file does (see the module table).
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Kind {
    /// A percentage change, at once or reached gradually.
    Percent,
    /// A fixed quantity added (or removed) per month over a period.
    Quantity,
    /// A target monthly level reached by a month.
    Target,
    /// Down to zero by a month.
    PhaseOut,
    /// A share of one product's consumption moves to another.
    Switch,
    /// A new product: an analogue's forecast × a factor.
    NewFromAnalogue,
    /// A new product: a start level, with an optional ramp-up.
    NewFromLevel,
}

impl Kind {
    /// The name written in the file.
    pub fn name(self) -> &'static str {
        KINDS[self as usize]
    }

    /// The kind with this name (case and surrounding spaces ignored).
    pub fn parse(s: &str) -> Option<Kind> {
        let s = s.trim().to_lowercase().replace(['_', ' '], "-");
        let all = [
            Kind::Percent,
            Kind::Quantity,
            Kind::Target,
            Kind::PhaseOut,
            Kind::Switch,
            Kind::NewFromAnalogue,
            Kind::NewFromLevel,
        ];
        all.into_iter().find(|k| k.name() == s)
    }

    /// Whether the kind makes a product without history.
    pub fn is_new(self) -> bool {
        matches!(self, Kind::NewFromAnalogue | Kind::NewFromLevel)
    }
}

/// One row of a changes file.
#[derive(Debug, Clone, PartialEq)]
pub struct Change {
    /// Where the row is: "line 4" (CSV) or "row 4" (sheet).
    pub place: String,
    /// The row number (line of a CSV, row of a sheet), 1-based.
    pub row: u64,
    /// Product changed (for a switch, the one moved away from).
    pub product: String,
    /// What the row does.
    pub kind: Kind,
    /// First month the change applies to.
    pub first: YearMonth,
    /// Last month: end of the period, or month the full effect is reached.
    pub last: Option<YearMonth>,
    /// The row's value (percent, quantity, level or share; see [`Kind`]).
    pub value: Option<f64>,
    /// Start level of `new-from-level`.
    pub start_value: Option<f64>,
    /// Switch target or analogue.
    pub other: Option<String>,
    /// Conversion factor (switch) or analogue factor.
    pub factor: Option<f64>,
    /// Why, and on what authority.
    pub note: String,
}

/// A forecast with its 80% and 95% ranges, month by month from `start`.
#[derive(Debug, Clone, PartialEq)]
pub struct Bands {
    /// First month.
    pub start: YearMonth,
    /// Point forecast.
    pub point: Vec<f64>,
    /// 80% lower bound.
    pub lower80: Vec<f64>,
    /// 80% upper bound.
    pub upper80: Vec<f64>,
    /// 95% lower bound.
    pub lower95: Vec<f64>,
    /// 95% upper bound.
    pub upper95: Vec<f64>,
}

impl Bands {
    /// A forecast of zero (a product with no history) over `n` months.
    pub fn zero(start: YearMonth, n: usize) -> Bands {
        Bands {
            start,
            point: vec![0.0; n],
            lower80: vec![0.0; n],
            upper80: vec![0.0; n],
            lower95: vec![0.0; n],
            upper95: vec![0.0; n],
        }
    }

    /// Last month.
    pub fn end(&self) -> YearMonth {
        self.start.plus(self.point.len() as i64 - 1)
    }

    /// Index of `m`, when inside.
    fn index(&self, m: YearMonth) -> Option<usize> {
        let k = self.start.months_until(m);
        (k >= 0 && (k as usize) < self.point.len()).then_some(k as usize)
    }

    fn columns_mut(&mut self) -> [&mut Vec<f64>; 4] {
        [
            &mut self.lower80,
            &mut self.upper80,
            &mut self.lower95,
            &mut self.upper95,
        ]
    }

    /// Total of the point forecast over months `from..to` (0-based, clipped
    /// to the length).
    pub fn total(&self, from: usize, to: usize) -> f64 {
        let to = to.min(self.point.len());
        self.point.get(from.min(to)..to).unwrap_or(&[]).iter().sum()
    }
}

/// A product's statistical and adjusted forecast.
#[derive(Debug, Clone, PartialEq)]
pub struct AdjustedProduct {
    /// Product.
    pub product: String,
    /// The statistical projection (zero for a new product).
    pub statistical: Bands,
    /// After the changes.
    pub adjusted: Bands,
    /// A product without history, made by the changes.
    pub new_product: bool,
    /// Rows (numbers) that changed it, in file order.
    pub rows: Vec<u64>,
}

/// One month a row changed (a line of `changes_applied.csv`).
#[derive(Debug, Clone, PartialEq)]
pub struct TraceRow {
    /// Product.
    pub product: String,
    /// Month.
    pub month: YearMonth,
    /// Row of the changes file.
    pub row: u64,
    /// Its kind.
    pub kind: Kind,
    /// The statistical forecast of the month.
    pub statistical: f64,
    /// The forecast before this row.
    pub before: f64,
    /// The forecast after this row (after clipping at zero).
    pub after: f64,
    /// Whether the row would have gone below zero and was clipped.
    pub clipped: bool,
    /// The row's note.
    pub note: String,
}

/// The effect of one row on one product's totals.
#[derive(Debug, Clone, PartialEq)]
pub struct Effect {
    /// Row of the changes file.
    pub row: u64,
    /// Kind.
    pub kind: Kind,
    /// Product.
    pub product: String,
    /// First month, last month (as written).
    pub first: YearMonth,
    /// Last month, when given.
    pub last: Option<YearMonth>,
    /// Change of the total of projected months 1–12.
    pub delta_12: f64,
    /// Change of the total of projected months 1–24.
    pub delta_24: f64,
    /// The row's note.
    pub note: String,
}

/// What applying a changes file produced.
#[derive(Debug, Clone, PartialEq, Default)]
pub struct Applied {
    /// Every product: the ones with a statistical projection in input
    /// order, then the new products in the order they were made.
    pub products: Vec<AdjustedProduct>,
    /// Every month a row changed.
    pub trace: Vec<TraceRow>,
    /// Each row's effect on each product it changed.
    pub effects: Vec<Effect>,
    /// Overlaps, new products, clipping: said to the user and logged.
    pub warnings: Vec<String>,
}

/// Share of a gradual change in force in month `m` (see the module docs).
fn share(c: &Change, m: YearMonth) -> f64 {
    let k = c.first.months_until(m);
    if k < 0 {
        return 0.0;
    }
    match c.last {
        Some(last) => {
            let n = c.first.months_until(last) + 1;
            ((k + 1) as f64 / n as f64).min(1.0)
        }
        None => 1.0,
    }
}

/// How a row moves the ranges of a month.
#[derive(Clone, Copy)]
enum Move {
    /// Scale by the ratio.
    Scale(f64),
    /// Shift by the quantity.
    Shift(f64),
}

fn err(file: &str, c: &Change, column: &str, message: String) -> Error {
    Error::Input {
        file: file.to_string(),
        line: c.row,
        column: Some(column.to_string()),
        message: format!("{} ({}): {message}", c.place, c.kind.name()),
    }
}

fn unknown_product(file: &str, c: &Change, column: &str, name: &str, known: &[&str]) -> Error {
    let hint = crate::config::did_you_mean(
        name,
        known.iter().copied(),
        " (names must match the data exactly)",
    );
    err(
        file,
        c,
        column,
        format!("product '{name}' is not in the forecast{hint}"),
    )
}

fn check_month(file: &str, c: &Change, column: &str, m: YearMonth, b: &Bands) -> Result<()> {
    if b.index(m).is_none() {
        return Err(err(
            file,
            c,
            column,
            format!(
                "{m} is outside the projection of '{}' ({} to {}); give a month in that range",
                c.product,
                b.start,
                b.end()
            ),
        ));
    }
    Ok(())
}

/// Months a row changes a product, for the overlap check.
fn span(c: &Change, b: &Bands) -> (YearMonth, YearMonth) {
    match c.kind {
        Kind::Quantity => (c.first, c.last.unwrap_or(b.end())),
        _ => (c.first, b.end()),
    }
}

/// Applies `changes` in order to the statistical projections `base`
/// (product → bands, in output order). `file` names the changes file in
/// errors. A new product (no history) gets a statistical forecast of zero
/// over the range of the product it is made from (`new-from-level`: the
/// widest range of the projections).
pub fn apply(file: &str, base: &[(String, Bands)], changes: &[Change]) -> Result<Applied> {
    let mut products: Vec<AdjustedProduct> = base
        .iter()
        .map(|(p, b)| AdjustedProduct {
            product: p.clone(),
            statistical: b.clone(),
            adjusted: b.clone(),
            new_product: false,
            rows: Vec::new(),
        })
        .collect();
    let mut at: HashMap<String, usize> = products
        .iter()
        .enumerate()
        .map(|(i, p)| (p.product.clone(), i))
        .collect();
    let history: Vec<&str> = base.iter().map(|(p, _)| p.as_str()).collect();
    let widest = {
        let start = base.iter().map(|(_, b)| b.start).min();
        let end = base.iter().map(|(_, b)| b.end()).max();
        match (start, end) {
            (Some(s), Some(e)) => Some((s, s.months_until(e) as usize + 1)),
            _ => None,
        }
    };
    let mut out = Applied::default();
    // Spans per product, for the overlap list: (row, from, to).
    let mut spans: HashMap<String, Vec<(u64, YearMonth, YearMonth)>> = HashMap::new();
    for c in changes {
        let names: Vec<String> = products.iter().map(|p| p.product.clone()).collect();
        let known: Vec<&str> = names.iter().map(String::as_str).collect();
        // The product the row changes first (for a switch: A).
        let idx = match (c.kind.is_new(), at.get(&c.product).copied()) {
            (false, Some(i)) => i,
            (false, None) => return Err(unknown_product(file, c, "product", &c.product, &known)),
            (true, Some(i)) if history.contains(&c.product.as_str()) => {
                let _ = i;
                return Err(err(
                    file,
                    c,
                    "product",
                    format!(
                        "'{}' has a history in the data; a new product is one without history (for a product with history use percent-change, target-level or quantity-per-month)",
                        c.product
                    ),
                ));
            }
            (true, Some(i)) => i,
            (true, None) => {
                let (start, n) = match c.kind {
                    Kind::NewFromAnalogue => {
                        let a = c.other.as_deref().unwrap_or("");
                        match at.get(a) {
                            Some(&j) => {
                                let b = &products[j].adjusted;
                                (b.start, b.point.len())
                            }
                            None => {
                                return Err(unknown_product(file, c, "other_product", a, &known))
                            }
                        }
                    }
                    _ => match widest {
                        Some(w) => w,
                        None => {
                            return Err(err(
                                file,
                                c,
                                "product",
                                "no product was projected, so there is no month range for a new product".into(),
                            ))
                        }
                    },
                };
                out.warnings.push(format!(
                    "{file}: {}: '{}' is a new product (no history): its statistical forecast is zero and its adjusted forecast comes from this row",
                    c.place, c.product
                ));
                push_new(&mut products, &mut at, &c.product, start, n);
                products.len() - 1
            }
        };
        let b = products[idx].adjusted.clone();
        if c.last.is_some_and(|l| l < c.first) {
            return Err(err(
                file,
                c,
                "last_month",
                format!("the last month is before the first month {}", c.first),
            ));
        }
        check_month(file, c, "first_month", c.first, &b)?;
        if let Some(l) = c.last {
            check_month(file, c, "last_month", l, &b)?;
        }
        let mut touched = vec![idx];
        match c.kind {
            Kind::Switch => {
                let other = c.other.clone().unwrap_or_default();
                let j = match at.get(&other) {
                    Some(&j) => j,
                    None => {
                        out.warnings.push(format!(
                            "{file}: {}: switch to '{other}', which is not in the data: it becomes a new product (statistical forecast zero)",
                            c.place
                        ));
                        push_new(&mut products, &mut at, &other, b.start, b.point.len());
                        products.len() - 1
                    }
                };
                if j == idx {
                    return Err(err(
                        file,
                        c,
                        "other_product",
                        "a switch needs two different products".into(),
                    ));
                }
                let bj = products[j].adjusted.clone();
                for m in [Some(c.first), c.last].into_iter().flatten() {
                    if bj.index(m).is_none() {
                        return Err(err(
                            file,
                            c,
                            "other_product",
                            format!(
                                "{m} is outside the projection of '{other}' ({} to {})",
                                bj.start,
                                bj.end()
                            ),
                        ));
                    }
                }
                let share_moved = c.value.unwrap_or(100.0) / 100.0;
                let factor = c.factor.unwrap_or(1.0);
                let mut moved = vec![0.0; b.point.len()];
                for (k, mv) in moved.iter_mut().enumerate() {
                    let m = b.start.plus(k as i64);
                    *mv = share(c, m) * share_moved * b.point[k];
                }
                apply_months(&mut products[idx], c, &mut out, |k, y| {
                    let mv = moved[k];
                    (
                        y - mv,
                        Move::Scale(if y > 0.0 { (y - mv) / y } else { 1.0 }),
                    )
                });
                let off = b.start.months_until(bj.start);
                apply_months(&mut products[j], c, &mut out, |k, y| {
                    let src = k as i64 + off;
                    let add = if src >= 0 {
                        moved.get(src as usize).copied().unwrap_or(0.0) * factor
                    } else {
                        0.0
                    };
                    (y + add, Move::Shift(add))
                });
                touched.push(j);
            }
            Kind::NewFromAnalogue => {
                let a = c.other.clone().unwrap_or_default();
                let j = match at.get(&a) {
                    Some(&j) => j,
                    None => return Err(unknown_product(file, c, "other_product", &a, &known)),
                };
                if j == idx {
                    return Err(err(
                        file,
                        c,
                        "other_product",
                        "a product cannot be its own analogue".into(),
                    ));
                }
                let an = products[j].adjusted.clone();
                let factor = c.factor.unwrap_or(1.0);
                let first = c.first;
                let p = &mut products[idx];
                let start = p.adjusted.start;
                let before = p.adjusted.clone();
                for k in 0..p.adjusted.point.len() {
                    let m = start.plus(k as i64);
                    if m < first {
                        continue;
                    }
                    let Some(ka) = an.index(m) else { continue };
                    let y = before.point[k];
                    let add = factor * an.point[ka];
                    p.adjusted.point[k] = y + add;
                    p.adjusted.lower80[k] += factor * an.lower80[ka];
                    p.adjusted.upper80[k] += factor * an.upper80[ka];
                    p.adjusted.lower95[k] += factor * an.lower95[ka];
                    p.adjusted.upper95[k] += factor * an.upper95[ka];
                    out.trace.push(trace(p, c, k, y, y + add, false));
                }
                if !p.rows.contains(&c.row) {
                    p.rows.push(c.row);
                }
            }
            Kind::Percent => {
                let v = c.value.unwrap_or(0.0) / 100.0;
                apply_months(&mut products[idx], c, &mut out, |k, y| {
                    let r = 1.0 + share(c, b.start.plus(k as i64)) * v;
                    (y * r, Move::Scale(r))
                });
            }
            Kind::PhaseOut => {
                apply_months(&mut products[idx], c, &mut out, |k, y| {
                    let r = 1.0 - share(c, b.start.plus(k as i64));
                    (y * r, Move::Scale(r))
                });
            }
            Kind::Target => {
                let v = c.value.unwrap_or(0.0);
                apply_months(&mut products[idx], c, &mut out, |k, y| {
                    let t = y + share(c, b.start.plus(k as i64)) * (v - y);
                    if y > 0.0 {
                        (t, Move::Scale(t / y))
                    } else {
                        (t, Move::Shift(t - y))
                    }
                });
            }
            Kind::Quantity => {
                let v = c.value.unwrap_or(0.0);
                let last = c.last.unwrap_or(b.end());
                apply_months(&mut products[idx], c, &mut out, |k, y| {
                    let m = b.start.plus(k as i64);
                    let add = if m <= last { v } else { 0.0 };
                    (y + add, Move::Shift(add))
                });
            }
            Kind::NewFromLevel => {
                let s = c.start_value.unwrap_or(0.0);
                let full = c.value.unwrap_or(s);
                apply_months(&mut products[idx], c, &mut out, |k, y| {
                    let m = b.start.plus(k as i64);
                    let level = match c.last {
                        Some(l) if l > c.first => {
                            let t = (c.first.months_until(m) as f64
                                / c.first.months_until(l) as f64)
                                .min(1.0);
                            s + t * (full - s)
                        }
                        _ => full,
                    };
                    (y + level, Move::Shift(level))
                });
            }
        }
        for &t in &touched {
            let p = &products[t];
            let (from, to) = span(c, &p.adjusted);
            let list = spans.entry(p.product.clone()).or_default();
            for &(row, f, e) in list.iter() {
                if f <= to && from <= e {
                    let (a, z) = (f.max(from), e.min(to));
                    out.warnings.push(format!(
                        "{file}: product '{}': rows {row} and {} overlap in {a} to {z}; applied in file order (row {row} first)",
                        p.product, c.row
                    ));
                }
            }
            list.push((c.row, from, to));
        }
    }
    // Effects: each row's change of each product's totals, from the trace.
    let mut effects: Vec<Effect> = Vec::new();
    for t in &out.trace {
        let Some(&i) = at.get(&t.product) else {
            continue;
        };
        let k = products[i].adjusted.start.months_until(t.month);
        let d = t.after - t.before;
        let pos = effects
            .iter()
            .position(|e| e.row == t.row && e.product == t.product);
        let e = match pos {
            Some(p) => &mut effects[p],
            None => {
                let Some(c) = changes.iter().find(|c| c.row == t.row) else {
                    continue;
                };
                effects.push(Effect {
                    row: t.row,
                    kind: t.kind,
                    product: t.product.clone(),
                    first: c.first,
                    last: c.last,
                    delta_12: 0.0,
                    delta_24: 0.0,
                    note: c.note.clone(),
                });
                let n = effects.len() - 1;
                &mut effects[n]
            }
        };
        if k < 12 {
            e.delta_12 += d;
        }
        if k < 24 {
            e.delta_24 += d;
        }
    }
    out.effects = effects;
    let clipped: Vec<&TraceRow> = out.trace.iter().filter(|t| t.clipped).collect();
    let mut seen: Vec<(u64, &str)> = Vec::new();
    for t in &clipped {
        if seen.contains(&(t.row, t.product.as_str())) {
            continue;
        }
        seen.push((t.row, t.product.as_str()));
        let months: Vec<String> = clipped
            .iter()
            .filter(|x| x.row == t.row && x.product == t.product)
            .map(|x| x.month.to_string())
            .collect();
        out.warnings.push(format!(
            "{file}: row {} ({}) would drive '{}' below zero in {} month(s) ({}); clipped at zero",
            t.row,
            t.kind.name(),
            t.product,
            months.len(),
            months.join(", ")
        ));
    }
    out.products = products;
    Ok(out)
}

fn push_new(
    products: &mut Vec<AdjustedProduct>,
    at: &mut HashMap<String, usize>,
    name: &str,
    start: YearMonth,
    n: usize,
) {
    let z = Bands::zero(start, n);
    products.push(AdjustedProduct {
        product: name.to_string(),
        statistical: z.clone(),
        adjusted: z,
        new_product: true,
        rows: Vec::new(),
    });
    at.insert(name.to_string(), products.len() - 1);
}

fn trace(
    p: &AdjustedProduct,
    c: &Change,
    k: usize,
    before: f64,
    after: f64,
    clipped: bool,
) -> TraceRow {
    TraceRow {
        product: p.product.clone(),
        month: p.adjusted.start.plus(k as i64),
        row: c.row,
        kind: c.kind,
        statistical: p.statistical.point[k],
        before,
        after,
        clipped,
        note: c.note.clone(),
    }
}

/// Applies `rule` (month index, value before → value after, range move) to
/// the months of `p` from `c.first` on, clipping at zero and tracing every
/// month whose value changed or that lies in the row's period.
fn apply_months(
    p: &mut AdjustedProduct,
    c: &Change,
    out: &mut Applied,
    rule: impl Fn(usize, f64) -> (f64, Move),
) {
    let start = p.adjusted.start;
    for k in 0..p.adjusted.point.len() {
        let m = start.plus(k as i64);
        if m < c.first {
            continue;
        }
        if c.kind == Kind::Quantity && c.last.is_some_and(|l| m > l) {
            continue;
        }
        let y = p.adjusted.point[k];
        let (after, mv) = rule(k, y);
        let clipped = after < 0.0;
        let after = after.max(0.0);
        p.adjusted.point[k] = after;
        for col in p.adjusted.columns_mut() {
            let v = match mv {
                Move::Scale(r) => col[k] * r.max(0.0),
                Move::Shift(d) => col[k] + d,
            };
            col[k] = v.max(0.0);
        }
        out.trace.push(trace(p, c, k, y, after, clipped));
    }
    if !p.rows.contains(&c.row) {
        p.rows.push(c.row);
    }
}

#[cfg(test)]
mod tests;
