//! Big lots end to end, against the scripting stack in the same run.
//!
//! Generates lot pairs in a temporary folder (never committed): 2 × 200,000 units × 30
//! characteristics and 2 × 1,000,000 × 10, as CSV with one column per characteristic (no
//! label column, so that both baselines read the very same files). Then measures, for each
//! pair:
//! - `lotshift compare A B --json - --permutations 0` end to end (both loads and every
//!   default check; the best of three runs, taking turns with the fast script's three)
//!   against `python3 benches/baseline_fast.py A B`, the scripting stack written
//!   the fast way (pandas.read_csv, numpy/scipy, Mardia's third moments by BLAS in chunks;
//!   a copy of the project's peer baseline), and against `benches/baseline.py` (the
//!   straightforward way, third moments by `einsum`), shown as a second, labelled row;
//! - peak memory of lotshift (`/usr/bin/time -v`, maximum resident set) against the size of
//!   the lots as f64;
//! - loading throughput (both lots parsed in parallel, MB of CSV per second per core, best of
//!   three) and the decimal reader against fast-float2, a maintained float parser, on every
//!   cell of one lot file (the same values bit for bit is checked);
//!
//! and cross-checks lotshift's numbers against both baselines. The window's time to the first
//! result and frame times are in `benches/frame_time.rs`.
//!
//! Run: `cargo bench --bench pipeline` (needs python3 with numpy, scipy and pandas for the
//! baselines: `pip install numpy scipy pandas`; without them the baseline columns say so).

use std::io::Write as _;
use std::path::{Path, PathBuf};
use std::process::Command;
use std::time::Instant;

use lotshift::data::{self, LoadOptions};
use lotshift::stats::permutation::SplitMix64;

/// Writes a lot of `n` units × `p` correlated characteristics with a small shift.
fn write_lot(path: &Path, n: usize, p: usize, shift: f64, seed: u64) {
    let f = std::fs::File::create(path).unwrap();
    let mut w = std::io::BufWriter::with_capacity(1 << 20, f);
    let header: Vec<String> = (0..p).map(|k| format!("c{k:02} (mm)")).collect();
    writeln!(w, "{}", header.join(",")).unwrap();
    let mut rng = SplitMix64(seed);
    let mut u = || ((rng.next_u64() >> 11) as f64 + 0.5) / (1u64 << 53) as f64;
    let mut z = vec![0.0; p];
    let mut line = String::with_capacity(16 * p);
    for _ in 0..n {
        for v in z.iter_mut() {
            let (a, b) = (u(), u());
            *v = (-2.0 * a.ln()).sqrt() * (std::f64::consts::TAU * b).cos();
        }
        line.clear();
        let mut prev = 0.0;
        for (k, &zk) in z.iter().enumerate() {
            // Neighbouring characteristics correlate (about 0.45).
            let x = 10.0 * (k as f64 + 1.0)
                + 0.05 * (zk + 0.9 * prev)
                + if k < 2 { shift } else { 0.0 };
            prev = zk;
            if k > 0 {
                line.push(',');
            }
            line.push_str(&format!("{x:.6}"));
        }
        writeln!(w, "{line}").unwrap();
    }
}

fn file_mb(p: &Path) -> f64 {
    std::fs::metadata(p).map_or(0.0, |m| m.len() as f64 / 1e6)
}

struct Run {
    seconds: f64,
    peak_mb: Option<f64>,
    json: serde_json::Value,
}

fn run_lotshift(a: &Path, b: &Path) -> Run {
    let bin = env!("CARGO_BIN_EXE_lotshift");
    let timed = Path::new("/usr/bin/time").exists();
    let mut cmd = if timed {
        let mut c = Command::new("/usr/bin/time");
        c.arg("-v").arg(bin);
        c
    } else {
        Command::new(bin)
    };
    cmd.args(["compare"])
        .arg(a)
        .arg(b)
        .args(["--json", "-", "--permutations", "0"]);
    let t = Instant::now();
    let out = cmd.output().expect("lotshift runs");
    let seconds = t.elapsed().as_secs_f64();
    assert!(
        out.status.success(),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    let stderr = String::from_utf8_lossy(&out.stderr);
    let peak_mb = stderr
        .lines()
        .find(|l| l.contains("Maximum resident set size"))
        .and_then(|l| l.rsplit(':').next())
        .and_then(|v| v.trim().parse::<f64>().ok())
        .map(|kb| kb / 1024.0);
    Run {
        seconds,
        peak_mb,
        json: serde_json::from_slice(&out.stdout).expect("record"),
    }
}

fn run_baseline(a: &Path, b: &Path) -> Option<(f64, serde_json::Value)> {
    let script = Path::new(env!("CARGO_MANIFEST_DIR")).join("benches/baseline.py");
    let t = Instant::now();
    let out = Command::new("python3")
        .arg(script)
        .arg(a)
        .arg(b)
        .output()
        .ok()?;
    let seconds = t.elapsed().as_secs_f64();
    if !out.status.success() {
        eprintln!("baseline failed: {}", String::from_utf8_lossy(&out.stderr));
        return None;
    }
    Some((seconds, serde_json::from_slice(&out.stdout).ok()?))
}

/// The fast baseline: seconds and its numbers (T², F, p, Box's M, then b1 and b2 per lot).
fn run_fast_baseline(a: &Path, b: &Path) -> Option<(f64, Vec<f64>)> {
    let script = Path::new(env!("CARGO_MANIFEST_DIR")).join("benches/baseline_fast.py");
    let t = Instant::now();
    let out = Command::new("python3")
        .arg(script)
        .arg(a)
        .arg(b)
        .output()
        .ok()?;
    let seconds = t.elapsed().as_secs_f64();
    if !out.status.success() {
        eprintln!(
            "fast baseline failed: {}",
            String::from_utf8_lossy(&out.stderr)
        );
        return None;
    }
    let values: Vec<f64> = String::from_utf8_lossy(&out.stdout)
        .split_whitespace()
        .filter_map(|v| v.parse().ok())
        .collect();
    (values.len() == 8).then_some((seconds, values))
}

/// lotshift's numbers against the fast baseline's (printed to 10 significant digits).
fn cross_check_fast(ours: &serde_json::Value, base: &[f64]) -> bool {
    let f = |v: &serde_json::Value| v.as_f64().unwrap_or(f64::NAN);
    let h = &ours["hotelling"];
    let mut ok = agree("T²", f(&h["t2"]), base[0], 1e-8);
    ok &= agree("F", f(&h["f"]), base[1], 1e-8);
    ok &= agree("p", f(&h["p_value"]), base[2], 1e-6);
    ok &= agree("Box's M", f(&ours["box_m"]["m"]), base[3], 1e-8);
    for g in 0..2 {
        ok &= agree(
            "Mardia b1",
            f(&ours["mardia"][g]["skewness"]),
            base[4 + 2 * g],
            1e-8,
        );
        ok &= agree(
            "Mardia b2",
            f(&ours["mardia"][g]["kurtosis"]),
            base[5 + 2 * g],
            1e-8,
        );
    }
    ok
}

/// The decimal reader against fast-float2 on every number of `path`, each read where it
/// stands in its line as the one-pass reader reads it (the number at the start of the rest of
/// the line, and the bytes it takes): MB per second of each, best of six (the two taking
/// turns at going first), and whether they read the same values and lengths.
fn parsers(path: &Path) -> (f64, f64, bool) {
    let text = std::fs::read(path).unwrap();
    let body = &text[text.iter().position(|&b| b == b'\n').unwrap() + 1..];
    let mut starts: Vec<&[u8]> = Vec::new();
    for line in body.split(|&b| b == b'\n') {
        let mut at = 0;
        while at < line.len() {
            starts.push(&line[at..]);
            at += line[at..]
                .iter()
                .position(|&b| b == b',')
                .map_or(line.len() - at, |i| i + 1);
        }
    }
    let mb = body.len() as f64 / 1e6;
    let mut same = true;
    let (mut ours, mut theirs) = (f64::INFINITY, f64::INFINITY);
    // Output buffers allocated once, outside the timing; the two take turns at going first
    // (whichever went first in every round was measured slower, even the same parser twice).
    let mut a: Vec<(f64, usize)> = Vec::with_capacity(starts.len());
    let mut b: Vec<(f64, usize)> = Vec::with_capacity(starts.len());
    for round in 0..6 {
        for crate_first in [round % 2 == 0, round % 2 == 1] {
            let t = Instant::now();
            if crate_first {
                b.clear();
                b.extend(
                    starts
                        .iter()
                        .map(|c| fast_float2::parse_partial::<f64, _>(c).unwrap_or((f64::NAN, 0))),
                );
                theirs = theirs.min(t.elapsed().as_secs_f64());
            } else {
                a.clear();
                a.extend(
                    starts
                        .iter()
                        .map(|c| data::parse_number_prefix(c, false).unwrap_or((f64::NAN, 0))),
                );
                ours = ours.min(t.elapsed().as_secs_f64());
            }
        }
        same &= a
            .iter()
            .zip(&b)
            .all(|(x, y)| x.0.to_bits() == y.0.to_bits() && x.1 == y.1);
    }
    (mb / ours, mb / theirs, same)
}

fn agree(name: &str, ours: f64, theirs: f64, rel: f64) -> bool {
    let ok = (ours - theirs).abs() <= rel * theirs.abs().max(1e-300);
    if !ok {
        println!("  MISMATCH {name}: lotshift {ours:e}, baseline {theirs:e}");
    }
    ok
}

fn cross_check(ours: &serde_json::Value, base: &serde_json::Value) -> bool {
    let f = |v: &serde_json::Value| v.as_f64().unwrap_or(f64::NAN);
    let mut ok = agree("T²", f(&ours["hotelling"]["t2"]), f(&base["t2"]), 1e-8);
    ok &= agree("F", f(&ours["hotelling"]["f"]), f(&base["f"]), 1e-8);
    ok &= agree(
        "p",
        f(&ours["hotelling"]["p_value"]),
        f(&base["p_value"]),
        1e-6,
    );
    ok &= agree(
        "critical T²",
        f(&ours["hotelling"]["critical_t2"]),
        f(&base["critical_t2"]),
        1e-8,
    );
    ok &= agree("Box's M", f(&ours["box_m"]["m"]), f(&base["box_m"]), 1e-6);
    for (k, iv) in ours["intervals"]
        .as_array()
        .into_iter()
        .flatten()
        .enumerate()
    {
        for (key, bkey) in [
            ("simultaneous", "simultaneous"),
            ("bonferroni", "bonferroni"),
        ] {
            for side in 0..2 {
                ok &= agree(
                    &format!("{key}[{k}]"),
                    f(&iv[key][side]),
                    f(&base[bkey][k][side]),
                    1e-7,
                );
            }
        }
    }
    for g in 0..2 {
        ok &= agree(
            "Mardia b1",
            f(&ours["mardia"][g]["skewness"]),
            f(&base["mardia"][g]["skewness"]),
            1e-6,
        );
        ok &= agree(
            "Mardia b2",
            f(&ours["mardia"][g]["kurtosis"]),
            f(&base["mardia"][g]["kurtosis"]),
            1e-8,
        );
    }
    ok
}

fn main() {
    let dir: PathBuf =
        std::env::temp_dir().join(format!("lotshift-pipeline-{}", std::process::id()));
    std::fs::create_dir_all(&dir).unwrap();
    println!(
        "machine: {} cores available",
        std::thread::available_parallelism().map_or(1, |c| c.get())
    );
    println!(
        "{:<44} {:>12} {:>12} {:>9} {:>14}",
        "figure", "lotshift", "baseline", "ratio", "target"
    );
    let mut all_ok = true;
    for (n, p) in [(200_000usize, 30usize), (1_000_000, 10)] {
        let a = dir.join(format!("a-{n}x{p}.csv"));
        let b = dir.join(format!("b-{n}x{p}.csv"));
        let t = Instant::now();
        std::thread::scope(|s| {
            s.spawn(|| write_lot(&a, n, p, 0.0, 1));
            s.spawn(|| write_lot(&b, n, p, 0.001, 2));
        });
        let mb = file_mb(&a) + file_mb(&b);
        eprintln!(
            "generated 2 x {n} x {p} ({mb:.0} MB of CSV) in {:.1} s",
            t.elapsed().as_secs_f64()
        );
        let label = format!("2 x {n} x {p}");
        // Loading throughput, both lots in parallel, best of 3.
        let load_s = (0..3)
            .map(|_| {
                let t = Instant::now();
                let lots =
                    data::load_two(&[a.clone(), b.clone()], None, None, &LoadOptions::default())
                        .unwrap();
                let s = t.elapsed().as_secs_f64();
                drop(lots);
                s
            })
            .fold(f64::INFINITY, f64::min);
        let per_core = mb / 2.0 / load_s;
        let ok = per_core >= 500.0;
        all_ok &= ok;
        println!(
            "{:<44} {:>10.0}/s {:>12} {:>9} {:>14}",
            format!("load MB per core, {label}, {}", data::NUMBER_READER),
            per_core,
            "",
            "",
            if ok { ">= 500 ok" } else { "< 500 MISSED" }
        );
        let (ours_mb, theirs_mb, same) = parsers(&a);
        all_ok &= same;
        println!(
            "{:<44} {:>10.0}/s {:>10.0}/s {:>9.2} {:>14}",
            format!("{} vs fast-float2 alone, {label}", data::NUMBER_READER),
            ours_mb,
            theirs_mb,
            ours_mb / theirs_mb,
            if !same {
                "VALUES DIFFER"
            } else if ours_mb >= theirs_mb {
                "kept: faster"
            } else {
                "crate faster"
            }
        );
        // Each program three times, taking turns, the best time of each (the machine's own
        // noise moves a single run by a third); the peak memory is the largest of the three.
        let mut ours = run_lotshift(&a, &b);
        let mut fast = run_fast_baseline(&a, &b);
        for _ in 0..2 {
            let again = run_lotshift(&a, &b);
            ours.seconds = ours.seconds.min(again.seconds);
            ours.peak_mb = match (ours.peak_mb, again.peak_mb) {
                (Some(x), Some(y)) => Some(x.max(y)),
                (x, y) => x.or(y),
            };
            if let (Some(best), Some(next)) = (fast.as_mut(), run_fast_baseline(&a, &b)) {
                best.0 = best.0.min(next.0);
            }
        }
        let f64_mb = (2 * n * p * 8) as f64 / 1e6;
        if let Some(peak) = ours.peak_mb {
            let ratio = peak / f64_mb;
            let ok = ratio <= 2.0;
            all_ok &= ok;
            println!(
                "{:<44} {:>10.0}MB {:>10.0}MB {:>9.2} {:>14}",
                format!("peak memory vs lots as f64, {label}"),
                peak,
                f64_mb,
                ratio,
                if ok { "<= 2.0 ok" } else { "> 2.0 MISSED" }
            );
        }
        let target = if n == 200_000 { 5.0 } else { 3.0 };
        match fast {
            Some((base_s, base)) => {
                let ratio = base_s / ours.seconds;
                let ok = ratio >= target;
                all_ok &= ok;
                println!(
                    "{:<44} {:>11.2}s {:>11.2}s {:>9.2} {:>14}",
                    format!("compare vs fast baseline, {label}"),
                    ours.seconds,
                    base_s,
                    ratio,
                    if ok {
                        format!(">= {target}x ok")
                    } else {
                        format!("< {target}x MISSED")
                    }
                );
                let same = cross_check_fast(&ours.json, &base);
                all_ok &= same;
                println!(
                    "{:<44} {:>12}",
                    format!("numbers agree with the fast baseline, {label}"),
                    if same { "yes" } else { "NO" }
                );
            }
            None => println!(
                "{:<44} {:>11.2}s {:>12}",
                format!("compare end to end, {label}"),
                ours.seconds,
                "no fast baseline (python3 with pandas, numpy, scipy needed)"
            ),
        }
        if let Some((base_s, base)) = run_baseline(&a, &b) {
            println!(
                "{:<44} {:>11.2}s {:>11.2}s {:>9.2} {:>14}",
                format!("compare vs straightforward script, {label}"),
                ours.seconds,
                base_s,
                base_s / ours.seconds,
                "(no target)"
            );
            let same = cross_check(&ours.json, &base);
            all_ok &= same;
            println!(
                "{:<44} {:>12}",
                format!("numbers agree with that script, {label}"),
                if same { "yes" } else { "NO" }
            );
        }
    }
    let _ = std::fs::remove_dir_all(&dir);
    if !all_ok {
        std::process::exit(1);
    }
}
