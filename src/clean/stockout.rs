//! Stockout adjustment: consumption in a month with stockout days
//! under-states demand.

/// Monthly form used by `clean`: demand ≈ consumed × days in month ÷ days
/// with stock. `None` when the product was out of stock the whole month
/// (no day with stock, so consumption says nothing about demand).
pub fn adjust_month(consumed: f64, days_in_month: u32, stockout_days: f64) -> Option<f64> {
    let with_stock = days_in_month as f64 - stockout_days;
    if with_stock <= 0.0 {
        None
    } else {
        Some(consumed * days_in_month as f64 / with_stock)
    }
}

/// Period form: adjusted average monthly consumption = total consumption ÷
/// (months in period − days out of stock ÷ 30.4) (WHO, *Operational Guide
/// for National TB Control Programmes on the Introduction and Use of
/// Fixed-Dose Combination Drugs*, 2002, Annex 5). `None` when the period
/// has no month with stock.
pub fn adjusted_average_monthly(total: f64, months: f64, days_out: f64) -> Option<f64> {
    let months_with_stock = months - days_out / crate::calendar::AVERAGE_DAYS_PER_MONTH;
    if months_with_stock <= 0.0 {
        None
    } else {
        Some(total / months_with_stock)
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    // WHO 2002, Annex 5 form; check value given in the project's issue:
    // 10,000 units over 12 months with 60 days out of stock → 997.4 a month.
    #[test]
    fn period_form_who_2002() {
        let v = adjusted_average_monthly(10_000.0, 12.0, 60.0).unwrap();
        assert!((v - 997.4).abs() < 0.05, "{v}");
        assert_eq!(adjusted_average_monthly(100.0, 1.0, 31.0), None);
    }

    // The monthly form is the period form applied to one month with its
    // real day count: both give the same demand for a 30.4-day month.
    #[test]
    fn monthly_form_matches_period_form_for_one_month() {
        // 30-day month, 6 days out: 480 × 30 / 24 = 600.
        assert_eq!(adjust_month(480.0, 30, 6.0), Some(600.0));
        assert_eq!(adjust_month(480.0, 30, 30.0), None);
        assert_eq!(adjust_month(480.0, 31, 0.0), Some(480.0));
        // Over a year of 12 average months, spreading 60 days out evenly
        // (5 a month) the monthly form reproduces the period form.
        let per_month = 10_000.0 / 12.0;
        let monthly: f64 = (0..12)
            .map(|_| {
                let with_stock = 30.4 - 5.0;
                per_month * 30.4 / with_stock
            })
            .sum::<f64>()
            / 12.0;
        let period = adjusted_average_monthly(10_000.0, 12.0, 60.0).unwrap();
        assert!((monthly - period).abs() < 1e-9, "{monthly} vs {period}");
    }
}
