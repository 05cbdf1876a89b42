//! provisio's STL against the `stlrs` crate 0.4 (the netlib Fortran STL
//! ported to Rust, as `augurs` ships it) with the same settings: period 12,
//! seasonal window 11 and degree 0, trend 21 and low-pass 13 of degree 1,
//! jumps 1, five inner iterations, no robustness. provisio computes each
//! loess smoother's weights once and reuses them; the components must be
//! the same to the last bit. Series: the open datasets of
//! tests/reference/datasets.json (AirPassengers, wineind, PBS immune sera;
//! R's `datasets` and `forecast` packages ship them), every prefix from two
//! years up, raw and on the log scale where positive.

use augurs::mstl::stlrs;
use provisio::models::stl;
use serde_json::Value;

fn datasets() -> Vec<(String, Vec<f64>)> {
    let path = concat!(env!("CARGO_MANIFEST_DIR"), "/tests/reference/datasets.json");
    let v: Value = serde_json::from_str(&std::fs::read_to_string(path).unwrap()).unwrap();
    ["AirPassengers", "wineind", "PBS_immune_sera"]
        .iter()
        .map(|name| {
            let values = v["datasets"][name]["values"]
                .as_array()
                .unwrap()
                .iter()
                .map(|x| x.as_f64().unwrap())
                .collect();
            (name.to_string(), values)
        })
        .collect()
}

fn reference(y: &[f64]) -> (Vec<f64>, Vec<f64>, Vec<f64>, f64) {
    let mut p = stlrs::params();
    p.seasonal_length(11)
        .seasonal_degree(0)
        .trend_degree(1)
        .low_pass_degree(1)
        .seasonal_jump(1)
        .trend_jump(1)
        .low_pass_jump(1)
        .inner_loops(5)
        .outer_loops(0);
    let fit = p.fit(y, 12).unwrap();
    (
        fit.seasonal().to_vec(),
        fit.trend().to_vec(),
        fit.remainder().to_vec(),
        fit.seasonal_strength(),
    )
}

#[test]
fn same_components_as_stlrs_to_the_last_bit() {
    let mut checked = 0;
    for (name, full) in datasets() {
        let logged: Option<Vec<f64>> = full
            .iter()
            .all(|&v| v > 0.0)
            .then(|| full.iter().map(|v| v.ln()).collect());
        for series in std::iter::once(&full).chain(logged.as_ref()) {
            for n in 24..=series.len() {
                let y = &series[..n];
                let ours = stl::decompose(y).unwrap();
                let (s, t, r, strength) = reference(y);
                assert_eq!(ours.seasonal, s, "{name} n={n} seasonal");
                assert_eq!(ours.trend, t, "{name} n={n} trend");
                assert_eq!(ours.remainder, r, "{name} n={n} remainder");
                assert_eq!(
                    ours.seasonal_strength().to_bits(),
                    strength.to_bits(),
                    "{name} n={n} strength"
                );
                checked += 1;
            }
        }
    }
    assert!(checked > 500, "{checked}");
    // Fewer than two years: no decomposition (stlrs refuses too).
    assert!(stl::decompose(&[1.0; 23]).is_none());
}
