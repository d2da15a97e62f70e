//! The comparison inside PostgreSQL against reading the rows out, on 2 × 1,000,000 units × 10
//! characteristics: both times and the bytes each moves from the server to lotshift.
//!
//! The lots are generated inside the server (`generate_series`, a seeded `random()`), once
//! per run. Reading the rows out is `compare --database … --query …` (every row to lotshift,
//! then the full analysis without permutations and the leave-one-out rate, the parts the
//! in-database mode does not compute either); the in-database comparison is
//! `compare --database … --in-database` (the moments, Mardia's sums and the outlier units).
//! Bytes moved are the results' sizes as PostgreSQL's protocol carries them (per row a
//! header, per cell a length and the value: `ResultTable::wire_bytes`). Both comparisons must give the same T², p, intervals,
//! Box's M and Mardia's statistics (1e-9 relative): the bench checks them.
//!
//! Run: `bash .ci/with-postgres cargo bench --bench database` (or with
//! LOTSHIFT_TEST_POSTGRES_URL set to a server you may create a table on).

use std::time::Instant;

use lotshift::analysis::{Settings, Silent};
use lotshift::data::{LoadOptions, Selection};
use lotshift::pipeline::{self, Request};
use lotshift::source::aggregate::{self, Choice};
use lotshift::source::{Database, QuerySource};

const N: usize = 1_000_000;
const P: usize = 10;

fn close(a: f64, b: f64, what: &str) {
    let scale = a.abs().max(b.abs()).max(1e-300);
    assert!((a - b).abs() <= 1e-9 * scale, "{what}: {a} vs {b}");
}

fn main() {
    let Ok(url) = std::env::var("LOTSHIFT_TEST_POSTGRES_URL") else {
        println!(
            "database bench: no PostgreSQL server (run `bash .ci/with-postgres cargo bench --bench database`)"
        );
        return;
    };
    let mut client = postgres::Client::connect(&url, postgres::NoTls).expect("server");
    let cols: Vec<String> = (1..=P)
        .map(|k| {
            // Sums of uniforms, near normal, neighbouring characteristics correlated; the
            // candidate shifted by a tenth of a spread on the first two.
            format!(
                "10.0 * {k} + 0.05 * (r{k} + 0.9 * r{prev}) + CASE WHEN g > {N} AND {k} <= 2 THEN 0.005 ELSE 0 END AS \"c{k:02} (mm)\"",
                prev = if k == 1 { P } else { k - 1 }
            )
        })
        .collect();
    let randoms: Vec<String> = (1..=P)
        .map(|k| format!("(random() + random() + random() - 1.5) AS r{k}"))
        .collect();
    let t = Instant::now();
    client
        .batch_execute(&format!(
            "DROP TABLE IF EXISTS bench_lots;
             SELECT setseed(0.2026);
             CREATE TABLE bench_lots AS
               SELECT CASE WHEN g <= {N} THEN 'R' ELSE 'C' END AS lot, 'U' || g AS serial, {}
               FROM (SELECT g, {} FROM generate_series(1, {}) AS g) AS s;
             ANALYZE bench_lots;",
            cols.join(", "),
            randoms.join(", "),
            2 * N
        ))
        .expect("the bench table");
    println!(
        "database bench: 2 × {N} units × {P} characteristics generated in PostgreSQL in {:.1} s",
        t.elapsed().as_secs_f64()
    );
    let source = QuerySource {
        database: Database::parse(&url).unwrap(),
        query: "SELECT * FROM bench_lots".into(),
        lot_column: "lot".into(),
        lot_values: Some(["R".into(), "C".into()]),
    };
    let settings = Settings {
        permutations: 0,
        leave_one_out: false,
        sequential: None,
        ..Settings::default()
    };
    // Inside the database.
    let t0 = Instant::now();
    let inside = aggregate::compare_in_database(
        &source,
        None,
        &LoadOptions::default(),
        &Choice::default(),
        &settings,
    )
    .expect("in-database comparison");
    let inside_s = t0.elapsed().as_secs_f64();
    let inside_b: u64 = inside.statements.iter().map(|r| r.bytes).sum();
    // Inside the database, the core test only (no Mardia sums, no outlier statement).
    let t0 = Instant::now();
    let core = aggregate::compare_in_database(
        &source,
        None,
        &LoadOptions::default(),
        &Choice::default(),
        &Settings {
            checks: false,
            ..settings.clone()
        },
    )
    .expect("in-database comparison without checks");
    let core_s = t0.elapsed().as_secs_f64();
    let core_b: u64 = core.statements.iter().map(|r| r.bytes).sum();
    close(
        core.comparison.hotelling.t2,
        inside.comparison.hotelling.t2,
        "T² without checks",
    );
    // Reading the rows out.
    let t0 = Instant::now();
    let (mut lots, read_b) =
        lotshift::source::load_lots_counted(&source, None, &LoadOptions::default()).expect("rows");
    let request = Request {
        selection: Selection::default(),
        settings: settings.clone(),
        ..Request::default()
    };
    let (_, rows) = pipeline::run_owned(&mut lots, &request, &Silent).expect("comparison");
    let rows_s = t0.elapsed().as_secs_f64();
    let a = &inside.comparison;
    close(a.hotelling.t2, rows.hotelling.t2, "T²");
    close(a.hotelling.p_value, rows.hotelling.p_value, "p");
    for (x, y) in a.intervals.iter().zip(&rows.intervals) {
        close(x.simultaneous[0], y.simultaneous[0], "interval");
        close(x.bonferroni[1], y.bonferroni[1], "interval");
    }
    if let (Some(x), Some(y)) = (&a.box_m, &rows.box_m) {
        close(x.m, y.m, "Box's M");
    }
    for (x, y) in a.mardia.iter().zip(&rows.mardia) {
        close(x.skewness, y.skewness, "Mardia b1");
        close(x.kurtosis, y.kurtosis, "Mardia b2");
    }
    println!("| way | time | bytes from the server |");
    println!("|---|---|---|");
    println!(
        "| rows read out, then compared | {rows_s:.1} s | {:.0} MB |",
        read_b as f64 / 1e6
    );
    println!(
        "| inside the database ({} statements) | {inside_s:.1} s | {:.1} kB |",
        inside.statements.len(),
        inside_b as f64 / 1e3
    );
    println!(
        "| inside the database, checks off ({} statements) | {core_s:.1} s | {:.1} kB |",
        core.statements.len(),
        core_b as f64 / 1e3
    );
    for r in &inside.statements {
        let first = r
            .sql
            .lines()
            .find(|l| l.contains("SUM(") || l.contains("COUNT("))
            .unwrap_or("");
        println!(
            "  {:>6.2} s  {:>7} B  {}",
            r.seconds,
            r.bytes,
            first.trim().chars().take(70).collect::<String>()
        );
    }
    println!(
        "inside the database: {:.2}× the time, {:.0}× fewer bytes; T² {:.6} both ways",
        inside_s / rows_s,
        read_b as f64 / inside_b.max(1) as f64,
        a.hotelling.t2
    );
    client.batch_execute("DROP TABLE bench_lots").unwrap();
}
