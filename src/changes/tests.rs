//! Unit tests of the changes module: the share of a gradual change, the
//! value-added arithmetic, and the refusals of the reader. Expected values
//! are worked by hand from the definitions in the module docs.

use super::read::read_changes_bytes;
use super::score::value_added;
use super::*;
use crate::data::NumberFormat;

fn ym(y: i32, m: u32) -> YearMonth {
    YearMonth::new(y, m).expect("month")
}

fn change(kind: Kind, first: YearMonth, last: Option<YearMonth>) -> Change {
    Change {
        place: "line 2".into(),
        row: 2,
        product: "P".into(),
        kind,
        first,
        last,
        value: Some(10.0),
        start_value: None,
        other: None,
        factor: None,
        note: String::new(),
    }
}

#[test]
fn a_gradual_change_is_full_in_its_last_month() {
    // Jan to Apr: 1/4, 2/4, 3/4, 4/4; nothing before, all after.
    let c = change(Kind::Percent, ym(2027, 1), Some(ym(2027, 4)));
    let got: Vec<f64> = (-1..6).map(|k| share(&c, ym(2027, 1).plus(k))).collect();
    assert_eq!(got, vec![0.0, 0.25, 0.5, 0.75, 1.0, 1.0, 1.0]);
    let at_once = change(Kind::Percent, ym(2027, 1), None);
    assert_eq!(share(&at_once, ym(2027, 1)), 1.0);
}

#[test]
fn value_added_is_the_wape_difference() {
    // Actuals 100, 200; without 90, 150 → |errors| 10 + 50 = 60 over 300 =
    // 20%; with 100, 190 → 10 / 300 = 3.333%; value added 16.667 points.
    // Bias without: (−10 − 50) / 300 = −20%.
    let v = value_added(&[(100.0, 90.0, 100.0), (200.0, 150.0, 190.0)]);
    assert_eq!(v.months, 2);
    assert!((v.wape_without.unwrap() - 20.0).abs() < 1e-9);
    assert!((v.wape_with.unwrap() - 10.0 / 3.0).abs() < 1e-9);
    assert!((v.value_added.unwrap() - (20.0 - 10.0 / 3.0)).abs() < 1e-9);
    assert!((v.bias_without.unwrap() + 20.0).abs() < 1e-9);
    // All-zero actuals: no percentage can be formed.
    assert_eq!(value_added(&[(0.0, 5.0, 0.0)]).value_added, None);
}

#[test]
fn the_reader_names_line_and_column() {
    let e = read_changes_bytes(
        "c.csv",
        b"product,kind,first_month,value,colour\nA,percent-change,2027-01,5,red\n",
        NumberFormat::Plain,
    )
    .unwrap_err()
    .to_string();
    assert!(
        e.contains("c.csv:1") && e.contains("unknown column 'colour'"),
        "{e}"
    );
    let e = read_changes_bytes(
        "c.csv",
        b"product,kind,first_month,value\nA,percent-change,2027-13,5\n",
        NumberFormat::Plain,
    )
    .unwrap_err()
    .to_string();
    assert!(e.contains("c.csv:2: column 'first_month'"), "{e}");
    let e = read_changes_bytes(
        "c.csv",
        b"product,kind,first_month,value\nA,switch,2027-01,50\n",
        NumberFormat::Plain,
    )
    .unwrap_err()
    .to_string();
    assert!(e.contains("other_product is empty"), "{e}");
    let e = read_changes_bytes(
        "c.csv",
        b"product,kind,first_month,value\nA,quantity-per-month,2027-01,\"1,5\"\n",
        NumberFormat::Plain,
    )
    .unwrap_err()
    .to_string();
    assert!(
        e.contains("c.csv:2: column 'value'") && e.contains("has a comma"),
        "{e}"
    );
    let ok = read_changes_bytes(
        "c.csv",
        b"product,kind,first_month\n# a comment\nA,phase-out,2027-01\n",
        NumberFormat::Plain,
    )
    .expect("read");
    assert_eq!(ok.changes.len(), 1);
    assert_eq!(ok.changes[0].row, 3);
    assert_eq!(ok.warnings.len(), 1, "an empty note is warned");
}

#[test]
fn a_switch_conserves_the_converted_quantity() {
    // A = 100 a month for 4 months; 30% moves at once from month 2, 3 units
    // of B per unit of A: A loses 30 × 3 months = 90; B gains 270.
    let b = Bands {
        start: ym(2027, 1),
        point: vec![100.0; 4],
        lower80: vec![80.0; 4],
        upper80: vec![120.0; 4],
        lower95: vec![70.0; 4],
        upper95: vec![130.0; 4],
    };
    let mut c = change(Kind::Switch, ym(2027, 2), None);
    c.product = "A".into();
    c.value = Some(30.0);
    c.other = Some("B".into());
    c.factor = Some(3.0);
    let out = apply("c.csv", &[("A".into(), b)], &[c]).expect("apply");
    let a = &out.products[0];
    let bb = &out.products[1];
    assert!(bb.new_product);
    assert_eq!(a.adjusted.point, vec![100.0, 70.0, 70.0, 70.0]);
    assert_eq!(bb.adjusted.point, vec![0.0, 90.0, 90.0, 90.0]);
    // A's range scaled by 0.7: 120 × 0.7 = 84; B's shifted by 90 from 0.
    assert!((a.adjusted.upper80[1] - 84.0).abs() < 1e-9);
    assert_eq!(bb.adjusted.upper80[1], 90.0);
    let lost: f64 = 400.0 - a.adjusted.point.iter().sum::<f64>();
    assert_eq!(bb.adjusted.point.iter().sum::<f64>(), 3.0 * lost);
}

#[test]
fn odd_files_are_refused_or_read_without_loss() {
    // Empty, a header only, not UTF-8: refused with the file named.
    for bytes in [
        &b""[..],
        b"product,kind,first_month\n",
        b"product,kind,first_month\n\xff\xfe,x,y\n",
    ] {
        let e = read_changes_bytes("c.csv", bytes, NumberFormat::Plain)
            .unwrap_err()
            .to_string();
        assert!(e.starts_with("c.csv"), "{e}");
    }
    // A byte-order mark and spaced, capitalised headers are read.
    let ok = read_changes_bytes(
        "c.csv",
        "\u{feff}Product, Kind ,First month,Note\n'=A,Phase-out,2027-01,why\n".as_bytes(),
        NumberFormat::Plain,
    )
    .expect("read");
    // The apostrophe provisio's outputs put before formula-like text is taken off.
    assert_eq!(ok.changes[0].product, "=A");
    assert_eq!(ok.changes[0].kind, Kind::PhaseOut);
    // A library caller's last month before the first is refused, not divided by.
    let b = Bands::zero(ym(2027, 1), 3);
    let mut c = change(Kind::Percent, ym(2027, 3), Some(ym(2027, 1)));
    c.product = "A".into();
    let e = apply("c.csv", &[("A".into(), b)], &[c])
        .unwrap_err()
        .to_string();
    assert!(e.contains("before the first month"), "{e}");
}

#[test]
fn no_value_is_dropped_or_read_in_another_number_style() {
    let read = |bytes: &[u8], numbers| read_changes_bytes("c.csv", bytes, numbers);
    // A column named twice: which value counts would be a guess.
    let e = read(
        b"product,kind,first_month,value,note,value\nA,percent-change,2027-05,20,x,50\n",
        NumberFormat::Plain,
    )
    .unwrap_err()
    .to_string();
    assert!(
        e.contains("c.csv:1") && e.contains("'value' appears twice (field 4 and field 6)"),
        "{e}"
    );
    // A value beyond the header's columns (an unquoted comma in a note
    // shifts the rest of the row: RFC 4180 §2 asks for the quotes) is
    // refused at its line; an empty trailing field is not a value.
    let e = read(
        b"product,kind,first_month,value,note\nA,percent-change,2027-05,20,more doses, from May\n",
        NumberFormat::Plain,
    )
    .unwrap_err()
    .to_string();
    assert!(
        e.contains("c.csv:2") && e.contains("'from May' in field 6 has no column name"),
        "{e}"
    );
    let ok = read(
        b"product,kind,first_month,value,note\nA,percent-change,2027-05,20,\"more doses, from May\",\n",
        NumberFormat::Plain,
    )
    .expect("read");
    assert_eq!(ok.changes[0].note, "more doses, from May");
    // Numbers follow --numbers, as the data does: 1.500 is fifteen hundred
    // with a decimal comma, and 2.5 is not a number written that way.
    let ok = read(
        b"product;kind;first_month;value;note\nA;quantity-per-month;2027-07;1.500;x\nA;percent-change;2027-07;-2,5;y\n",
        NumberFormat::DecimalComma,
    )
    .expect("read");
    assert_eq!(ok.changes[0].value, Some(1500.0));
    assert_eq!(ok.changes[1].value, Some(-2.5));
    let e = read(
        b"product;kind;first_month;value;note\nA;percent-change;2027-07;2.5;y\n",
        NumberFormat::DecimalComma,
    )
    .unwrap_err()
    .to_string();
    assert!(e.contains("c.csv:2: column 'value'"), "{e}");
    assert_eq!(
        read(
            b"product,kind,first_month,value,note\nA,quantity-per-month,2027-07,1.500,x\n",
            NumberFormat::Plain
        )
        .expect("read")
        .changes[0]
            .value,
        Some(1.5)
    );
}

#[test]
fn a_percentage_written_as_a_fraction_or_factor_is_warned() {
    let read = |row: &str| {
        let text = format!("product,kind,first_month,value,other_product,note\n{row}\n");
        read_changes_bytes("c.csv", text.as_bytes(), NumberFormat::Plain).expect("read")
    };
    // Values are percentages (common practice in these files: 25 for a
    // quarter); 0.25 and 1.2 are read as written, and named.
    let w = read("A,percent-change,2027-01,0.25,,why").warnings;
    assert!(
        w.len() == 1
            && w[0].contains("value 0.25 is read as +0.25%")
            && w[0].contains("if 25% was meant, write 25"),
        "{w:?}"
    );
    let w = read("A,percent-change,2027-01,1.2,,why").warnings;
    assert!(
        w.len() == 1 && w[0].contains("if a factor of 1.2 (+20%) was meant, write 20"),
        "{w:?}"
    );
    let w = read("A,switch,2027-01,0.5,B,why").warnings;
    assert!(
        w.len() == 1 && w[0].contains("if 50% was meant, write 50"),
        "{w:?}"
    );
    // Whole numbers and ordinary percentages pass without a word.
    for row in [
        "A,percent-change,2027-01,20,,why",
        "A,percent-change,2027-01,-15,,why",
        "A,percent-change,2027-01,2.5,,why",
        "A,switch,2027-01,25,B,why",
        "A,switch,2027-01,1.5,B,why",
    ] {
        assert!(read(row).warnings.is_empty(), "{row}");
    }
}
