//! The command line: `compare`, `compare-stats`, `inspect`; no subcommand opens the window.

use std::path::PathBuf;
use std::process::ExitCode;

use clap::{Args, Parser, Subcommand};

use crate::analysis::{self, LotData, Settings, Silent, SummaryLot, format_sig};
use crate::data::{self, ColumnData, LoadOptions, Lot, Selection};
use crate::report::{self, Record};

/// Writes a line to standard output; a closed pipe (`lotshift ... | head`) is not an error
/// worth a panic, so write failures are ignored.
macro_rules! outln {
    ($($arg:tt)*) => {{
        use std::io::Write as _;
        let _ = writeln!(std::io::stdout().lock(), $($arg)*);
    }};
}

/// Writes text to standard output, ignoring a closed pipe.
fn out(text: &str) {
    use std::io::Write as _;
    let _ = std::io::stdout().lock().write_all(text.as_bytes());
}

/// Exit status when the lots differ and `--fail-on-shift` was given.
pub const EXIT_SHIFT: u8 = 1;
/// Exit status for bad input or a failed analysis.
pub const EXIT_BAD_INPUT: u8 = 2;

/// lotshift: do two production lots differ on several characteristics at once, and why?
#[derive(Debug, Parser)]
#[command(name = "lotshift", version, args_conflicts_with_subcommands = true)]
pub struct Cli {
    /// What to do; without one, the window opens.
    #[command(subcommand)]
    pub command: Option<Command>,
    /// Render the window to this PNG file and exit.
    #[arg(long, value_name = "PNG")]
    pub screenshot: Option<PathBuf>,
    /// View to show first in the window (overview, characteristics, intervals, pairs,
    /// direction).
    #[arg(long, value_name = "VIEW")]
    pub view: Option<String>,
    /// Lot files to open in the window (two files; default: the bundled sample lots).
    #[arg(value_name = "FILE")]
    pub files: Vec<PathBuf>,
}

/// Subcommands.
#[derive(Debug, Subcommand)]
pub enum Command {
    /// Compare two lots (two files, or one file split by a lot column).
    Compare(CompareArgs),
    /// Compare two lots given only as summary statistics (n, mean vector, covariance).
    CompareStats(StatsArgs),
    /// Show what lotshift sees in a file: delimiter, columns and their roles, missing cells.
    Inspect(InspectArgs),
    /// Power of the test for a given shift and lot size, or the lot size for a target power.
    Plan(PlanArgs),
}

/// Arguments of `plan`.
#[derive(Debug, Args)]
pub struct PlanArgs {
    /// Number of characteristics compared (with --distance).
    #[arg(long, value_name = "P")]
    pub characteristics: Option<usize>,
    /// Size of the shift to detect as a Mahalanobis distance (in pooled standard deviations
    /// along the shift; 1.0 is a shift of one standard deviation for one characteristic).
    #[arg(long, value_name = "D")]
    pub distance: Option<f64>,
    /// Take the shift and covariance from a summary-statistics file (as for compare-stats):
    /// the shift is the difference of the two mean vectors, the covariance the pooled one.
    #[arg(long, value_name = "FILE", conflicts_with_all = ["characteristics", "distance"])]
    pub from_summary: Option<PathBuf>,
    /// Units per lot to give the power for (both lots the same size).
    #[arg(long, value_name = "N")]
    pub units: Option<usize>,
    /// Target power: print the smallest number of units per lot that reaches it.
    #[arg(long, value_name = "POWER", default_value_t = 0.9)]
    pub target_power: f64,
    /// Significance level.
    #[arg(long, default_value_t = 0.05)]
    pub alpha: f64,
}

/// Which lots to read and which characteristics to compare.
#[derive(Debug, Args)]
pub struct LotArgs {
    /// The reference lot file and the candidate lot file (or one file with --split-by).
    #[arg(value_name = "FILE", required = true, num_args = 1..=2)]
    pub files: Vec<PathBuf>,
    /// Column holding the lot of each unit, to split one file into two lots.
    #[arg(long, value_name = "COLUMN")]
    pub split_by: Option<String>,
    /// The two lot values to compare (reference first) when the lot column holds more.
    #[arg(long, value_name = "A,B", value_delimiter = ',', num_args = 2)]
    pub lots: Option<Vec<String>>,
    /// Sheet to read from spreadsheets (default: the first sheet with data).
    #[arg(long, value_name = "NAME")]
    pub sheet: Option<String>,
    /// Columns to treat as labels even if they look numeric (e.g. serial numbers).
    #[arg(long, value_name = "COL,...", value_delimiter = ',')]
    pub labels: Vec<String>,
    /// Compare only these characteristics, in this order.
    #[arg(long, value_name = "COL,...", value_delimiter = ',')]
    pub characteristics: Option<Vec<String>>,
    /// Leave these characteristics out.
    #[arg(long, value_name = "COL,...", value_delimiter = ',')]
    pub exclude: Vec<String>,
}

/// Arguments of `compare`.
#[derive(Debug, Args)]
pub struct CompareArgs {
    /// Lots and characteristics.
    #[command(flatten)]
    pub lots: LotArgs,
    /// Significance level of the test; intervals are at 1 - alpha confidence.
    #[arg(long, default_value_t = 0.05)]
    pub alpha: f64,
    /// Write the comparison record as JSON to FILE, or to standard output with "-".
    #[arg(long, value_name = "FILE")]
    pub json: Option<String>,
    /// Exit with status 1 when the lots differ (for pipelines).
    #[arg(long)]
    pub fail_on_shift: bool,
    /// Skip the leave-one-out misclassification rate.
    #[arg(long)]
    pub no_holdout: bool,
    /// Skip the assumption checks (Box's M, Mardia, Shapiro–Wilk, outliers, unequal covariance).
    #[arg(long)]
    pub no_checks: bool,
    /// Relabellings for the permutation p-value (0 skips it).
    #[arg(long, default_value_t = analysis::DEFAULT_PERMUTATIONS)]
    pub permutations: usize,
    /// Seed of the permutation draws (the same seed gives the same p-value).
    #[arg(long, default_value_t = analysis::DEFAULT_SEED)]
    pub seed: u64,
}

/// Arguments of `compare-stats`.
#[derive(Debug, Args)]
pub struct StatsArgs {
    /// JSON file with `characteristics` and two `lots`, each `{name, n, mean, covariance}`.
    #[arg(value_name = "FILE")]
    pub file: PathBuf,
    /// Significance level (overrides the file's `alpha`).
    #[arg(long)]
    pub alpha: Option<f64>,
    /// Write the comparison record as JSON to FILE, or to standard output with "-".
    #[arg(long, value_name = "FILE")]
    pub json: Option<String>,
    /// Exit with status 1 when the lots differ.
    #[arg(long)]
    pub fail_on_shift: bool,
}

/// Arguments of `inspect`.
#[derive(Debug, Args)]
pub struct InspectArgs {
    /// The file to look at.
    #[arg(value_name = "FILE")]
    pub file: PathBuf,
    /// Sheet to read from a spreadsheet.
    #[arg(long, value_name = "NAME")]
    pub sheet: Option<String>,
    /// Columns to treat as labels.
    #[arg(long, value_name = "COL,...", value_delimiter = ',')]
    pub labels: Vec<String>,
    /// Data rows to show.
    #[arg(long, default_value_t = 5)]
    pub rows: usize,
}

/// Summary statistics input of `compare-stats`.
#[derive(Debug, serde::Deserialize)]
struct StatsFile {
    characteristics: Vec<String>,
    #[serde(default)]
    units: Vec<Option<String>>,
    #[serde(default)]
    alpha: Option<f64>,
    lots: Vec<SummaryLot>,
}

type CliResult = Result<ExitCode, String>;

/// Runs a subcommand; returns the process exit status.
pub fn run(command: Command) -> ExitCode {
    let result = match command {
        Command::Compare(a) => compare(a),
        Command::CompareStats(a) => compare_stats(a),
        Command::Inspect(a) => inspect(a),
        Command::Plan(a) => plan(a),
    };
    match result {
        Ok(code) => code,
        Err(msg) => {
            eprintln!("lotshift: error: {msg}");
            ExitCode::from(EXIT_BAD_INPUT)
        }
    }
}

/// Reads the two lots named by `args`.
///
/// # Errors
/// The load error's message.
pub fn load_lots(args: &LotArgs) -> Result<[Lot; 2], String> {
    let options = LoadOptions {
        sheet: args.sheet.clone(),
        labels: args.labels.clone(),
    };
    let wanted = args.lots.as_ref().map(|v| [v[0].as_str(), v[1].as_str()]);
    data::load_two(&args.files, args.split_by.as_deref(), wanted, &options)
        .map_err(|e| e.to_string())
}

fn emit_json(target: &Option<String>, record: &Record) -> Result<(), String> {
    match target.as_deref() {
        None => Ok(()),
        Some("-") => {
            outln!("{}", record.to_json());
            Ok(())
        }
        Some(path) => report::write_atomic(std::path::Path::new(path), record.to_json().as_bytes())
            .map_err(|e| format!("cannot write the record: {e}")),
    }
}

fn compare(a: CompareArgs) -> CliResult {
    let lots = load_lots(&a.lots)?;
    let selection = Selection {
        only: a.lots.characteristics.clone(),
        exclude: a.lots.exclude.clone(),
    };
    let prepared = data::prepare(&lots[0], &lots[1], &selection).map_err(|e| e.to_string())?;
    let settings = Settings {
        alpha: a.alpha,
        leave_one_out: !a.no_holdout,
        checks: !a.no_checks,
        permutations: a.permutations,
        seed: a.seed,
    };
    let c = analysis::compare(
        &prepared.characteristics,
        &prepared.units,
        [
            LotData {
                name: &prepared.lots[0].name,
                data: &prepared.lots[0].data,
            },
            LotData {
                name: &prepared.lots[1].name,
                data: &prepared.lots[1].data,
            },
        ],
        &settings,
        &Silent,
    )
    .map_err(|e| e.to_string())?;
    let record = Record::new(&c, Some((&prepared, [&lots[0], &lots[1]])));
    if a.json.as_deref() != Some("-") {
        let files = [
            lots[0].provenance.file_name.as_str(),
            lots[1].provenance.file_name.as_str(),
        ];
        out(&report::render_text(&c, Some(&prepared), files));
    }
    emit_json(&a.json, &record)?;
    Ok(if a.fail_on_shift && c.hotelling.differ {
        ExitCode::from(EXIT_SHIFT)
    } else {
        ExitCode::SUCCESS
    })
}

fn compare_stats(a: StatsArgs) -> CliResult {
    let text =
        std::fs::read_to_string(&a.file).map_err(|e| format!("{}: {e}", a.file.display()))?;
    let spec: StatsFile =
        serde_json::from_str(&text).map_err(|e| format!("{}: {e}", a.file.display()))?;
    let [l1, l2] = spec.lots.as_slice() else {
        return Err(format!(
            "{}: \"lots\" must hold exactly two lots",
            a.file.display()
        ));
    };
    let units = if spec.units.is_empty() {
        vec![None; spec.characteristics.len()]
    } else {
        spec.units.clone()
    };
    let settings = Settings {
        alpha: a.alpha.or(spec.alpha).unwrap_or(0.05),
        leave_one_out: false,
        checks: true,
        permutations: 0,
        seed: analysis::DEFAULT_SEED,
    };
    let c = analysis::compare_summaries(&spec.characteristics, &units, [l1, l2], &settings)
        .map_err(|e| format!("{}: {e}", a.file.display()))?;
    let record = Record::new(&c, None);
    if a.json.as_deref() != Some("-") {
        let name = a.file.display().to_string();
        out(&report::render_text(&c, None, [&name, &name]));
    }
    emit_json(&a.json, &record)?;
    Ok(if a.fail_on_shift && c.hotelling.differ {
        ExitCode::from(EXIT_SHIFT)
    } else {
        ExitCode::SUCCESS
    })
}

fn inspect(a: InspectArgs) -> CliResult {
    let options = LoadOptions {
        sheet: a.sheet.clone(),
        labels: a.labels.clone(),
    };
    let lot = data::load(&a.file, &options).map_err(|e| e.to_string())?;
    let p = &lot.provenance;
    outln!("file        {}", p.path);
    outln!("sha256      {}", p.sha256);
    outln!("size        {} bytes", p.size_bytes);
    outln!("format      {}", p.format);
    if let Some(d) = p.delimiter {
        let name = match d {
            '\t' => "tab".to_string(),
            ',' => "comma".to_string(),
            ';' => "semicolon".to_string(),
            other => format!("{other:?}"),
        };
        outln!("delimiter   {name}");
        outln!(
            "decimal     {}",
            if p.decimal_comma { "comma" } else { "point" }
        );
    }
    if let Some(e) = &p.encoding {
        outln!("encoding    {e}");
    }
    if let Some(s) = &p.sheet {
        outln!("sheet       {s}");
    }
    outln!(
        "data rows   {} (rows {}..{})",
        lot.len(),
        lot.rows.first().unwrap_or(&0),
        lot.rows.last().unwrap_or(&0)
    );
    for n in &p.notes {
        outln!("note        {n}");
    }
    outln!("\ncolumns");
    outln!(
        "  {:<4} {:<28} {:<15} {:<10} {:>8}",
        "col",
        "header",
        "role",
        "unit",
        "missing"
    );
    for c in &lot.columns {
        let role = if c.is_numeric() {
            "characteristic"
        } else {
            "label"
        };
        outln!(
            "  {:<4} {:<28} {:<15} {:<10} {:>8}",
            data::column_letter(c.position),
            c.header,
            role,
            c.unit.as_deref().unwrap_or("-"),
            c.missing
        );
    }
    let shown = a.rows.min(lot.len());
    if shown > 0 {
        outln!("\nfirst {shown} rows");
        for i in 0..shown {
            let cells: Vec<String> = lot
                .columns
                .iter()
                .map(|c| match &c.data {
                    ColumnData::Numeric(v) if v[i].is_nan() => "(missing)".to_string(),
                    _ => c.text(i),
                })
                .collect();
            outln!("  row {:<6} {}", lot.rows[i], cells.join(" | "));
        }
    }
    Ok(ExitCode::SUCCESS)
}

fn plan(a: PlanArgs) -> CliResult {
    if !(a.alpha > 0.0 && a.alpha < 1.0) {
        return Err(format!(
            "alpha must lie strictly between 0 and 1 (got {})",
            a.alpha
        ));
    }
    if !(a.target_power > a.alpha && a.target_power < 1.0) {
        return Err(format!(
            "the target power must lie between alpha and 1 (got {})",
            a.target_power
        ));
    }
    let (p, delta2, source) = match (&a.from_summary, a.characteristics, a.distance) {
        (Some(file), _, _) => {
            let text =
                std::fs::read_to_string(file).map_err(|e| format!("{}: {e}", file.display()))?;
            let spec: StatsFile =
                serde_json::from_str(&text).map_err(|e| format!("{}: {e}", file.display()))?;
            let [l1, l2] = spec.lots.as_slice() else {
                return Err(format!(
                    "{}: \"lots\" must hold exactly two lots",
                    file.display()
                ));
            };
            let units = vec![None; spec.characteristics.len()];
            let settings = Settings {
                checks: false,
                permutations: 0,
                leave_one_out: false,
                ..Settings::default()
            };
            let c = analysis::compare_summaries(&spec.characteristics, &units, [l1, l2], &settings)
                .map_err(|e| format!("{}: {e}", file.display()))?;
            (
                spec.characteristics.len(),
                c.hotelling.mahalanobis_d2,
                format!("the shift and pooled covariance in {}", file.display()),
            )
        }
        (None, Some(p), Some(d)) if p > 0 && d >= 0.0 => {
            (p, d * d, format!("a shift of Mahalanobis distance {d}"))
        }
        _ => {
            return Err("give --characteristics P and --distance D, or --from-summary FILE".into());
        }
    };
    outln!("Power of Hotelling's T² at alpha {} for {source}", a.alpha);
    outln!("  characteristics            {p}");
    outln!(
        "  Mahalanobis distance       {}",
        format_sig(delta2.sqrt(), 4)
    );
    if let Some(n) = a.units {
        let pw = crate::stats::power::power(p, n, n, delta2, a.alpha);
        if pw.is_nan() {
            return Err(format!(
                "{n} units per lot are too few for {p} characteristics"
            ));
        }
        outln!("  power with {n} units per lot   {}", format_sig(pw, 4));
    }
    match crate::stats::power::units_per_lot(p, delta2, a.alpha, a.target_power) {
        Some(n) => outln!(
            "  units per lot for power {}   {n}  (power {})",
            a.target_power,
            format_sig(crate::stats::power::power(p, n, n, delta2, a.alpha), 4)
        ),
        None => outln!("  no lot size up to 10^8 reaches power {}", a.target_power),
    }
    Ok(ExitCode::SUCCESS)
}
