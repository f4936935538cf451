//! Exports parse back with general-purpose readers (the `vcd` crate's parser, the `csv` crate)
//! and carry the recording's values.

use std::collections::HashMap;

use slackmeter::export::{Value, collect, write_csv, write_vcd};
use slackmeter::record::Recording;

fn signals() -> slackmeter::export::Signals {
    let path = concat!(
        env!("CARGO_MANIFEST_DIR"),
        "/recordings/larkspur-sagging.smrec"
    );
    let mut rec = Recording::open(std::path::Path::new(path)).unwrap();
    collect(&mut rec).unwrap()
}

#[test]
fn vcd_round_trips_through_the_vcd_parser() {
    let s = signals();
    let mut buf = Vec::new();
    write_vcd(&s, &mut buf).unwrap();
    let mut p = vcd::Parser::new(&buf[..]);
    let header = p.parse_header().unwrap();
    assert_eq!(
        header.timescale,
        Some((1, vcd::TimescaleUnit::NS)),
        "8 ns tick → 1 ns timescale"
    );
    let scope = header
        .items
        .iter()
        .find_map(|i| {
            if let vcd::ScopeItem::Scope(s) = i {
                Some(s)
            } else {
                None
            }
        })
        .unwrap();
    let mut by_code = HashMap::new();
    for item in &scope.items {
        if let vcd::ScopeItem::Var(v) = item {
            by_code.insert(v.code, v.reference.clone());
        }
    }
    assert_eq!(by_code.len(), s.signals.len());
    let (mut t, mut clk, mut far) = (0u64, Vec::new(), Vec::new());
    for cmd in p {
        match cmd.unwrap() {
            vcd::Command::Timestamp(ts) => t = ts,
            vcd::Command::ChangeScalar(code, v) if by_code[&code] == "CLK" => {
                clk.push((t, v == vcd::Value::V1))
            }
            vcd::Command::ChangeReal(code, v) if by_code[&code] == "VCC_FAR" => far.push((t, v)),
            _ => {}
        }
    }
    let want_clk: Vec<(u64, bool)> = s
        .events
        .iter()
        .filter(|e| e.1 == 0)
        .map(|&(tick, _, v)| (tick * 8, v == Value::Level(true)))
        .collect();
    assert_eq!(clk, want_clk);
    let want_far: Vec<f64> = s
        .events
        .iter()
        .filter(|e| e.1 == 6)
        .map(|&(_, _, v)| {
            if let Value::Millivolts(m) = v {
                m / 1000.0
            } else {
                0.0
            }
        })
        .collect();
    assert_eq!(far.len(), want_far.len());
    for ((_, a), b) in far.iter().zip(&want_far) {
        assert!((a - b).abs() < 1e-9);
    }
}

#[test]
fn csv_round_trips_through_the_csv_reader() {
    let s = signals();
    let mut buf = Vec::new();
    write_csv(&s, &mut buf).unwrap();
    let mut r = csv::Reader::from_reader(&buf[..]);
    assert_eq!(
        r.headers().unwrap(),
        vec!["time_s", "channel", "label", "kind", "value"]
    );
    let mut n = 0;
    for (row, want) in r.records().zip(&s.events) {
        let row = row.unwrap();
        let t: f64 = row[0].parse().unwrap();
        assert!((t - want.0 as f64 * 8e-9).abs() < 1e-12);
        assert_eq!(row[1].parse::<u8>().unwrap(), want.1);
        match want.2 {
            Value::Level(b) => assert_eq!(&row[4], if b { "1" } else { "0" }),
            Value::Millivolts(mv) => {
                assert!((row[4].parse::<f64>().unwrap() - mv / 1000.0).abs() < 1e-4)
            }
        }
        n += 1;
    }
    assert_eq!(n, s.events.len());
}
