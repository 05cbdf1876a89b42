//! Reading a long CSV of monthly series for the examples.

use std::collections::BTreeMap;

/// Series of a CSV with columns `product,month,consumed` (oldest month
/// first), by product; the error names the file and line.
pub fn read(path: &str) -> Result<BTreeMap<String, Vec<f64>>, String> {
    let text = std::fs::read_to_string(path).map_err(|e| format!("{path}: {e}"))?;
    let mut out: BTreeMap<String, Vec<f64>> = BTreeMap::new();
    for (i, line) in text.lines().enumerate().skip(1) {
        let cols: Vec<&str> = line.rsplitn(3, ',').collect();
        if cols.len() != 3 {
            return Err(format!("{path}:{}: expected product,month,consumed", i + 1));
        }
        let v: f64 = cols[0]
            .trim()
            .parse()
            .map_err(|_| format!("{path}:{}: consumed {:?} is not a number", i + 1, cols[0]))?;
        out.entry(cols[2].to_string()).or_default().push(v);
    }
    Ok(out)
}
