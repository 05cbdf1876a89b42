//! Invented data: the demo scenario shipped in `datasets/`, and synthetic
//! sets of any size for benchmarks. Nothing here is real data.

use rand::{Rng, SeedableRng};
use rand_chacha::ChaCha8Rng;
use rand_distr::{Distribution, Gamma, Poisson};

use crate::calendar::YearMonth;

/// The demand pattern of a generated product.
#[derive(Debug, Clone, PartialEq)]
pub enum Pattern {
    /// Level demand with noise.
    Stable,
    /// Yearly cycle peaking in `peak_month` (1–12); `amplitude` is the peak's
    /// excess over the mean as a fraction (0.8 = 80% above average).
    Seasonal {
        /// Calendar month of the peak.
        peak_month: u32,
        /// Relative size of the peak.
        amplitude: f64,
    },
    /// Compound growth per year (negative for a product being phased out).
    Trend {
        /// Growth per year as a fraction (0.4 = +40% a year).
        per_year: f64,
    },
    /// Many zero months: demand occurs with probability `occurrence` each
    /// site-month.
    Intermittent {
        /// Chance of any demand in a site-month.
        occurrence: f64,
    },
}

/// One generated product.
#[derive(Debug, Clone, PartialEq)]
pub struct ProductSpec {
    /// Product name as written to the file.
    pub name: String,
    /// Demand pattern.
    pub pattern: Pattern,
    /// Mean monthly demand over all sites.
    pub base: f64,
    /// Coefficient of variation of month-to-month noise.
    pub noise: f64,
    /// Chance that a stockout episode starts in a site-month.
    pub stockout_chance: f64,
    /// Chance that a site-month is not reported.
    pub missing_chance: f64,
    /// Chance that a reported value carries a typing error (×10).
    pub typo_chance: f64,
}

/// One generated site (a district, reporting for its facilities).
#[derive(Debug, Clone, PartialEq)]
pub struct SiteSpec {
    /// Site name.
    pub name: String,
    /// Share of total demand.
    pub share: f64,
    /// Typical share of its facilities that report (0–1).
    pub reporting: f64,
}

/// A complete invented scenario.
#[derive(Debug, Clone, PartialEq)]
pub struct Scenario {
    /// First month.
    pub start: YearMonth,
    /// Number of months.
    pub months: usize,
    /// Sites.
    pub sites: Vec<SiteSpec>,
    /// Products.
    pub products: Vec<ProductSpec>,
    /// Random seed; the same seed gives the same file.
    pub seed: u64,
    /// Entry errors and campaign months added on request (none by default,
    /// so the demo and the default sets do not change).
    pub anomalies: Anomalies,
}

/// Anomalies to add to a generated set, drawn from their own random stream
/// (so the rest of the file is the same with or without them).
///
/// | field | default | meaning |
/// |---|---|---|
/// | `entry_errors` | 0 | chance that a reported site-month carries a data-entry error: ×10, or a digit too many (×10 plus a digit) |
/// | `campaigns` | 0 | chance that a product-month is a campaign month: true demand ×2 to ×4 at every site |
#[derive(Debug, Clone, Copy, Default, PartialEq)]
pub struct Anomalies {
    /// Chance of a data-entry error per reported site-month.
    pub entry_errors: f64,
    /// Chance of a campaign (a real demand spike) per product-month.
    pub campaigns: f64,
}

/// One generated row of the input contract.
#[derive(Debug, Clone, PartialEq)]
pub struct GeneratedRow {
    /// Product name.
    pub product: String,
    /// Site name.
    pub site: String,
    /// Month.
    pub month: YearMonth,
    /// Quantity reported; `None` = left empty (not reported).
    pub consumed: Option<f64>,
    /// Stockout days.
    pub stockout_days: u32,
    /// Reporting rate in percent (whole number).
    pub reporting_rate_pct: u32,
    /// The site-month's true demand (before stockouts, partial reporting
    /// and entry errors; campaigns included), rounded to 2 decimals.
    pub true_demand: f64,
}

fn product(
    name: &str,
    pattern: Pattern,
    base: f64,
    noise: f64,
    stockout: f64,
    missing: f64,
    typo: f64,
) -> ProductSpec {
    ProductSpec {
        name: name.to_string(),
        pattern,
        base,
        noise,
        stockout_chance: stockout,
        missing_chance: missing,
        typo_chance: typo,
    }
}

/// The demo scenario: Norvale Region (invented), four districts, twelve
/// products over five years ending October 2026.
pub fn demo_scenario() -> Scenario {
    let start = YearMonth::known(2021, 11);
    let site = |name: &str, share: f64, reporting: f64| SiteSpec {
        name: name.to_string(),
        share,
        reporting,
    };
    Scenario {
        start,
        months: 60,
        seed: 2026,
        anomalies: Anomalies::default(),
        sites: vec![
            site("Kestrel Hills District", 0.35, 0.95),
            site("Marrow Bay District", 0.30, 0.90),
            site("Tallow Creek District", 0.20, 0.82),
            site("Orrin Flats District", 0.15, 0.75),
        ],
        products: vec![
            product(
                "Artemether-lumefantrine 20/120 mg tablet x24",
                Pattern::Seasonal {
                    peak_month: 7,
                    amplitude: 1.2,
                },
                5200.0,
                0.12,
                0.02,
                0.03,
                0.003,
            ),
            product(
                "Malaria rapid diagnostic test",
                Pattern::Seasonal {
                    peak_month: 7,
                    amplitude: 0.9,
                },
                14000.0,
                0.10,
                0.015,
                0.03,
                0.003,
            ),
            product(
                "Oral rehydration salts sachet",
                Pattern::Seasonal {
                    peak_month: 3,
                    amplitude: 0.6,
                },
                9000.0,
                0.12,
                0.02,
                0.03,
                0.003,
            ),
            product(
                "Amoxicillin 250 mg dispersible tablet x10",
                Pattern::Seasonal {
                    peak_month: 6,
                    amplitude: 0.35,
                },
                7000.0,
                0.10,
                0.02,
                0.03,
                0.002,
            ),
            product(
                "HIV rapid test kit (newly scaled up)",
                Pattern::Trend { per_year: 0.45 },
                2500.0,
                0.10,
                0.02,
                0.02,
                0.002,
            ),
            product(
                "Contraceptive implant",
                Pattern::Trend { per_year: 0.20 },
                600.0,
                0.15,
                0.05,
                0.03,
                0.002,
            ),
            product(
                "Injectable contraceptive 150 mg vial",
                Pattern::Stable,
                3800.0,
                0.10,
                0.03,
                0.03,
                0.002,
            ),
            product(
                "Male condom",
                Pattern::Stable,
                42000.0,
                0.18,
                0.01,
                0.04,
                0.006,
            ),
            product(
                "Zinc 20 mg dispersible tablet x10",
                Pattern::Stable,
                2200.0,
                0.14,
                0.02,
                0.03,
                0.002,
            ),
            product(
                "Nevirapine oral solution (being phased out)",
                Pattern::Trend { per_year: -0.35 },
                900.0,
                0.12,
                0.02,
                0.03,
                0.002,
            ),
            product(
                "Oxytocin 10 IU ampoule",
                Pattern::Stable,
                1500.0,
                0.12,
                0.08,
                0.03,
                0.002,
            ),
            product(
                "Snake antivenom vial",
                Pattern::Intermittent { occurrence: 0.22 },
                6.0,
                0.5,
                0.0,
                0.03,
                0.0,
            ),
        ],
    }
}

/// A synthetic scenario of any size: product patterns drawn at random
/// (stable, seasonal, trending, intermittent) from the seed.
pub fn synthetic_scenario(products: usize, sites: usize, months: usize, seed: u64) -> Scenario {
    let mut rng = ChaCha8Rng::seed_from_u64(seed ^ 0x5eed);
    let sites = sites.max(1);
    let mut shares: Vec<f64> = (0..sites).map(|_| rng.gen_range(0.5..1.5)).collect();
    let sum: f64 = shares.iter().sum();
    shares.iter_mut().for_each(|s| *s /= sum);
    let site_specs = shares
        .into_iter()
        .enumerate()
        .map(|(i, share)| SiteSpec {
            name: format!("Site {:04}", i + 1),
            share,
            reporting: rng.gen_range(0.7..1.0),
        })
        .collect();
    let product_specs = (0..products)
        .map(|i| {
            let pattern = match rng.gen_range(0..10) {
                0..=2 => Pattern::Stable,
                3..=5 => Pattern::Seasonal {
                    peak_month: rng.gen_range(1..=12),
                    amplitude: rng.gen_range(0.2..1.2),
                },
                6..=7 => Pattern::Trend {
                    per_year: rng.gen_range(-0.3..0.5),
                },
                _ => Pattern::Intermittent {
                    occurrence: rng.gen_range(0.1..0.5),
                },
            };
            let base = match pattern {
                Pattern::Intermittent { .. } => rng.gen_range(2.0..40.0) * sites as f64,
                _ => rng.gen_range(50.0..20_000.0) * (sites as f64).sqrt(),
            };
            product(
                &format!("Product {:05}", i + 1),
                pattern,
                base,
                rng.gen_range(0.05..0.25),
                rng.gen_range(0.0..0.05),
                rng.gen_range(0.0..0.05),
                0.002,
            )
        })
        .collect();
    Scenario {
        start: YearMonth::known(2021, 1),
        months,
        sites: site_specs,
        products: product_specs,
        seed,
        anomalies: Anomalies::default(),
    }
}

/// Generates the rows of a scenario, product by product, site by site,
/// month by month. Deterministic for a given scenario.
pub fn generate(sc: &Scenario) -> Vec<GeneratedRow> {
    let mut rng = ChaCha8Rng::seed_from_u64(sc.seed);
    let mut odd = ChaCha8Rng::seed_from_u64(sc.seed ^ 0xa70_a11e5);
    let errors = sc.anomalies.entry_errors.clamp(0.0, 1.0);
    let campaigns = sc.anomalies.campaigns.clamp(0.0, 1.0);
    let mut rows = Vec::with_capacity(sc.products.len() * sc.sites.len() * sc.months);
    for p in &sc.products {
        let shape = p.noise.powi(-2).max(1.0);
        let noise = Gamma::new(shape, 1.0 / shape).ok();
        // Campaign months are the product's, at every site at once.
        let campaign: Vec<f64> = (0..sc.months)
            .map(|_| {
                if campaigns > 0.0 && odd.gen_bool(campaigns) {
                    odd.gen_range(2.0..4.0)
                } else {
                    1.0
                }
            })
            .collect();
        for s in &sc.sites {
            let mut stockout_left = 0u32;
            for (t, &spike) in campaign.iter().enumerate() {
                let month = sc.start.plus(t as i64);
                let years = t as f64 / 12.0;
                let mean = p.base
                    * s.share
                    * match p.pattern {
                        Pattern::Stable | Pattern::Intermittent { .. } => 1.0,
                        Pattern::Seasonal {
                            peak_month,
                            amplitude,
                        } => {
                            let phase = 2.0
                                * std::f64::consts::PI
                                * (month.month() as f64 - peak_month as f64)
                                / 12.0;
                            // Peak at `peak_month`, normalised to mean 1.
                            (1.0 + amplitude * (0.5 + 0.5 * phase.cos()).powi(2) * 2.0)
                                / (1.0 + amplitude * 0.75)
                        }
                        Pattern::Trend { per_year } => (1.0 + per_year).powf(years),
                    };
                let demand = match p.pattern {
                    Pattern::Intermittent { occurrence } => {
                        if rng.gen_bool(occurrence.clamp(0.0, 1.0)) {
                            let lambda = (mean / occurrence).max(0.5);
                            Poisson::new(lambda)
                                .map(|d| d.sample(&mut rng))
                                .unwrap_or(lambda)
                                + 1.0
                        } else {
                            0.0
                        }
                    }
                    _ => mean * noise.map(|g| g.sample(&mut rng)).unwrap_or(1.0),
                } * spike;
                let days = month.days();
                if stockout_left == 0 && rng.gen_bool(p.stockout_chance.clamp(0.0, 1.0)) {
                    stockout_left = rng.gen_range(1..=3);
                }
                let stockout_days = if stockout_left > 0 {
                    stockout_left -= 1;
                    if stockout_left >= 1 && rng.gen_bool(0.5) {
                        days
                    } else {
                        rng.gen_range(3..=days.min(25))
                    }
                } else {
                    0
                };
                let rate = (s.reporting + rng.gen_range(-0.08..0.08)).clamp(0.3, 1.0);
                let rate_pct = (rate * 100.0).round() as u32;
                let mut reported = (demand * (days - stockout_days) as f64 / days as f64
                    * rate_pct as f64
                    / 100.0)
                    .round();
                if rng.gen_bool(p.typo_chance.clamp(0.0, 1.0)) {
                    reported *= 10.0;
                }
                if errors > 0.0 && reported > 0.0 && odd.gen_bool(errors) {
                    // ×10, or a digit too many (the same digits and one more).
                    let extra = if odd.gen_bool(0.5) {
                        0.0
                    } else {
                        odd.gen_range(0..10) as f64
                    };
                    reported = reported * 10.0 + extra;
                }
                let true_demand = (demand * 100.0).round() / 100.0;
                if rng.gen_bool(p.missing_chance.clamp(0.0, 1.0)) {
                    if rng.gen_bool(0.5) {
                        continue; // no row at all
                    }
                    rows.push(GeneratedRow {
                        product: p.name.clone(),
                        site: s.name.clone(),
                        month,
                        consumed: None,
                        stockout_days: 0,
                        reporting_rate_pct: 0,
                        true_demand,
                    });
                    continue;
                }
                rows.push(GeneratedRow {
                    product: p.name.clone(),
                    site: s.name.clone(),
                    month,
                    consumed: Some(reported),
                    stockout_days,
                    reporting_rate_pct: rate_pct,
                    true_demand,
                });
            }
        }
    }
    rows
}

/// The columns of generated files.
const HEADER: [&str; 6] = [
    "product",
    "site",
    "month",
    "consumed",
    "stockout_days",
    "reporting_rate",
];

/// Writes generated rows as the long CSV input contract.
pub fn write_rows(w: &mut dyn std::io::Write, rows: &[GeneratedRow]) -> std::io::Result<()> {
    write_rows_with(w, rows, false)
}

/// [`write_rows`], with a last column `true_demand` when `truth` is set
/// (readers of the input contract ignore columns they do not know).
pub fn write_rows_with(
    w: &mut dyn std::io::Write,
    rows: &[GeneratedRow],
    truth: bool,
) -> std::io::Result<()> {
    let mut c = csv::Writer::from_writer(w);
    let e = std::io::Error::other;
    let mut header = HEADER.to_vec();
    if truth {
        header.push("true_demand");
    }
    c.write_record(&header).map_err(e)?;
    for r in rows {
        let mut rec = vec![
            r.product.clone(),
            r.site.clone(),
            r.month.to_string(),
            r.consumed.map(|v| format!("{v:.0}")).unwrap_or_default(),
            r.stockout_days.to_string(),
            // With its % sign, so the column is read as percent without
            // a note on every run.
            format!("{}%", r.reporting_rate_pct),
        ];
        if truth {
            rec.push(format!("{}", r.true_demand));
        }
        c.write_record(&rec).map_err(e)?;
    }
    c.flush()
}

/// The generated rows as an `.xlsx` workbook in the input contract: one
/// sheet, "Consumption", with names as text, months as date cells and the
/// quantities as number cells (the same values as [`write_rows`] writes).
pub fn workbook_bytes(rows: &[GeneratedRow]) -> Result<Vec<u8>, rust_xlsxwriter::XlsxError> {
    use rust_xlsxwriter::{ExcelDateTime, Format, Workbook};
    let mut book = Workbook::new();
    let ws = book.add_worksheet();
    ws.set_name("Consumption")?;
    let bold = Format::new().set_bold();
    let month = Format::new().set_num_format("yyyy-mm");
    let percent = Format::new().set_num_format("0%");
    for (c, h) in HEADER.iter().enumerate() {
        ws.write_string_with_format(0, c as u16, *h, &bold)?;
    }
    for (i, r) in rows.iter().enumerate() {
        let row = i as u32 + 1;
        ws.write_string(row, 0, r.product.as_str())?;
        ws.write_string(row, 1, r.site.as_str())?;
        let date = ExcelDateTime::from_ymd(r.month.year() as u16, r.month.month() as u8, 1)?;
        ws.write_datetime_with_format(row, 2, &date, &month)?;
        // The CSV's whole numbers, so both files hold the same values.
        if let Some(v) = r.consumed {
            let whole: f64 = format!("{v:.0}").parse().unwrap_or(v);
            ws.write_number(row, 3, whole)?;
        }
        ws.write_number(row, 4, r.stockout_days as f64)?;
        // A fraction shown as a percent, as a spreadsheet holds 90%.
        ws.write_number_with_format(row, 5, f64::from(r.reporting_rate_pct) / 100.0, &percent)?;
    }
    ws.set_column_width(0, 44)?;
    ws.set_column_width(1, 24)?;
    ws.set_column_width(2, 10)?;
    ws.set_freeze_panes(1, 0)?;
    book.save_to_buffer()
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn deterministic_and_sized() {
        let sc = synthetic_scenario(5, 3, 24, 7);
        let a = generate(&sc);
        let b = generate(&sc);
        assert_eq!(a, b);
        assert!(a.len() <= 5 * 3 * 24 && a.len() > 5 * 3 * 20);
    }

    #[test]
    fn demo_has_twelve_products_over_five_years() {
        let sc = demo_scenario();
        assert_eq!(sc.products.len(), 12);
        assert_eq!(sc.months, 60);
        let rows = generate(&sc);
        assert!(rows.iter().any(|r| r.stockout_days > 0));
        assert!(rows.iter().any(|r| r.consumed.is_none()));
    }

    #[test]
    fn anomalies_leave_the_rest_of_the_file_alone() {
        let plain = synthetic_scenario(20, 2, 36, 5);
        let mut odd = plain.clone();
        odd.anomalies = Anomalies {
            entry_errors: 0.05,
            campaigns: 0.05,
        };
        let (a, b) = (generate(&plain), generate(&odd));
        assert_eq!(generate(&odd), b, "deterministic by seed");
        assert_eq!(a.len(), b.len());
        let mut errors = 0;
        let mut campaigns = 0;
        for (x, y) in a.iter().zip(&b) {
            assert_eq!(
                (&x.product, &x.site, x.month),
                (&y.product, &y.site, y.month)
            );
            assert_eq!(x.stockout_days, y.stockout_days);
            if y.true_demand > 1.5 * x.true_demand + 1.0 {
                campaigns += 1;
            }
            // An entry error: ten times the value, plus at most one digit.
            if let (Some(u), Some(v)) = (x.consumed, y.consumed) {
                if v >= 10.0 * u && v > 0.0 && y.true_demand == x.true_demand {
                    assert!(v <= 10.0 * u + 9.0, "{u} -> {v}");
                    errors += 1;
                }
            }
        }
        assert!(errors > 0 && campaigns > 0, "{errors} {campaigns}");
    }

    #[test]
    fn true_demand_column_only_on_request() {
        let rows = generate(&synthetic_scenario(2, 1, 6, 1));
        let mut plain = Vec::new();
        write_rows(&mut plain, &rows).unwrap();
        let plain = String::from_utf8(plain).unwrap();
        assert!(plain.starts_with("product,site,month,consumed,stockout_days,reporting_rate\n"));
        let mut truth = Vec::new();
        write_rows_with(&mut truth, &rows, true).unwrap();
        let truth = String::from_utf8(truth).unwrap();
        assert!(truth
            .starts_with("product,site,month,consumed,stockout_days,reporting_rate,true_demand\n"));
        assert_eq!(truth.lines().count(), plain.lines().count());
    }
}
