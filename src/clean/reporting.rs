//! Reporting-rate adjustment: totals from part of the facilities
//! under-state the whole.

/// Adjusted total N = N_rep + N_rep × (1/c − 1) × k, where c is the
/// reporting rate and k how much a non-reporting facility is assumed to
/// consume relative to a reporting one (Maina et al., *Bulletin of the World
/// Health Organization* 95:683, 2017). k = 1 is plain division by the rate
/// (common practice); k = 0 leaves the total unchanged.
pub fn adjust(reported: f64, rate: f64, k: f64) -> f64 {
    reported + reported * (1.0 / rate - 1.0) * k
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn plain_division_common_practice() {
        // Common practice: 8,000 reported at 80% reporting → 10,000.
        assert!((adjust(8_000.0, 0.8, 1.0) - 10_000.0).abs() < 1e-9);
    }

    #[test]
    fn weighted_form_maina_2017() {
        // Maina et al. 2017 weighted form; check value from the project's
        // issue: k = 0.25 gives 8,500.
        assert!((adjust(8_000.0, 0.8, 0.25) - 8_500.0).abs() < 1e-9);
        assert_eq!(adjust(8_000.0, 0.8, 0.0), 8_000.0);
        assert_eq!(adjust(8_000.0, 1.0, 1.0), 8_000.0);
    }
}
