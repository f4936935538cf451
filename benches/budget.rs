//! Budget solver speed: a synthetic 10,000-arc design, and a 100-point supply sweep of the demo.
//! Run: `cargo bench --bench budget`.

use slackmeter::budget::{Design, Library, OperatingPoint, solve, sweep_vcc};
use slackmeter::diag::Source;

fn main() {
    divan::main();
}

/// A layered design: 200 launches, 10,000 arcs through 74HC parts, 200 captures.
fn synthetic(arcs: usize) -> String {
    let mut t = String::from("[design]\nname = \"synthetic\"\n");
    let parts = ["74HC04", "74HC00", "74HC86", "74HC157", "74HC283"];
    let arcs_of = ["A->Y", "A->Y", "A->Y", "I->Y", "AB->S"];
    for (i, p) in parts.iter().enumerate() {
        t += &format!("[[part]]\nref = \"G{i}\"\ntype = \"{p}\"\n");
    }
    t += "[[part]]\nref = \"R\"\ntype = \"74HC574\"\n";
    let launches = 200;
    for i in 0..launches {
        let edge = if i % 2 == 0 { "rise" } else { "fall" };
        t += &format!(
            "[[launch]]\nedge = \"{edge}\"\npart = \"R\"\narc = \"CLK->Q\"\nto = \"s{i}\"\n"
        );
    }
    // each new signal takes two inputs from earlier signals (a deterministic LCG picks them)
    let mut x: u64 = 12345;
    let mut next = |n: usize| {
        x = x
            .wrapping_mul(6364136223846793005)
            .wrapping_add(1442695040888963407);
        (x >> 33) as usize % n
    };
    let signals = launches + arcs / 2;
    for s in launches..signals {
        for _ in 0..2 {
            let from = next(s);
            let g = next(parts.len());
            t += &format!(
                "[[arc]]\nfrom = \"s{from}\"\nto = \"s{s}\"\npart = \"G{g}\"\narc = \"{}\"\n",
                arcs_of[g]
            );
        }
    }
    for i in 0..200 {
        let edge = if i % 3 == 0 { "fall" } else { "rise" };
        t += &format!(
            "[[capture]]\nsignal = \"s{}\"\nedge = \"{edge}\"\npart = \"R\"\ncheck = \"D->CLK\"\n",
            signals - 1 - i
        );
    }
    t
}

#[divan::bench]
fn solve_10k_arcs(bencher: divan::Bencher) {
    let lib = Library::builtin();
    let d = Design::parse(Source::new("synthetic", synthetic(10_000)), &lib).unwrap();
    assert_eq!(d.arcs.len(), 10_000);
    let op = OperatingPoint::of(&d);
    bencher.bench_local(|| solve(divan::black_box(&d), &lib, &op, None, None));
}

#[divan::bench]
fn sweep_demo_100_points(bencher: divan::Bencher) {
    let lib = Library::builtin();
    let d = Design::demo(&lib);
    let op = OperatingPoint::of(&d);
    bencher.bench_local(|| sweep_vcc(divan::black_box(&d), &lib, &op, 4.5, 5.5, 100));
}

#[divan::bench]
fn load_builtin_library(bencher: divan::Bencher) {
    bencher.bench_local(Library::builtin);
}
