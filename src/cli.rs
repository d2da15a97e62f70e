//! The command line: `compare`, `compare-stats`, `inspect`; no subcommand opens the window.

use std::path::PathBuf;
use std::process::ExitCode;

use clap::{Args, Parser, Subcommand};

use crate::analysis::decision::MarginRule;
use crate::analysis::{self, Settings, Silent, SummaryLot, format_sig};
use crate::data::{self, ColumnData, LoadOptions, Lot, Selection};
use crate::pipeline::{self, Request, SpecRequest};
use crate::report::{self, Record, html, sign};

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
    /// View to show first in the window (verdict, characteristics, intervals, pairs,
    /// direction).
    #[arg(long, value_name = "VIEW")]
    pub view: Option<String>,
    /// Lot files to open in the window (two files; default: the bundled sample lots).
    #[arg(value_name = "FILE")]
    pub files: Vec<PathBuf>,
}

/// Subcommands.
// Parsed once per run: the size of the largest variant does not matter.
#[allow(clippy::large_enum_variant)]
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
    /// Make an Ed25519 signing key pair for signed summaries.
    Keygen(KeygenArgs),
    /// Check a signed summary: its signature, and with the lot files, every number.
    Verify(VerifyArgs),
    /// Render a record or signed summary as a self-contained HTML page.
    Report(ReportArgs),
}

/// Arguments of `keygen`.
#[derive(Debug, Args)]
pub struct KeygenArgs {
    /// Printed name of the person the key belongs to.
    #[arg(long, value_name = "NAME")]
    pub signer: String,
    /// Folder to write the key files into.
    #[arg(long, value_name = "DIR")]
    pub out: PathBuf,
    /// Base name of the key files.
    #[arg(long, default_value = "lotshift-signing-key")]
    pub name: String,
}

/// Arguments of `verify`.
#[derive(Debug, Args)]
pub struct VerifyArgs {
    /// The signed summary.
    #[arg(value_name = "FILE")]
    pub file: PathBuf,
    /// The lot files (reference, candidate; or the one file both lots were read from with a
    /// lot column): checks their SHA-256 and recomputes every number.
    #[arg(long, value_name = "FILE", num_args = 1..=2)]
    pub files: Vec<PathBuf>,
    /// The expected signer's public key (PEM).
    #[arg(long, value_name = "PUB")]
    pub key: Option<PathBuf>,
    /// The specification file the comparison used: checks its SHA-256 and recomputes from
    /// the file's limits and margins (without it, from the ones the record holds).
    #[arg(long, value_name = "FILE")]
    pub spec: Option<PathBuf>,
}

/// Arguments of `report`.
#[derive(Debug, Args)]
pub struct ReportArgs {
    /// A comparison record or signed summary (JSON).
    #[arg(value_name = "FILE")]
    pub file: PathBuf,
    /// The HTML file to write.
    #[arg(long, value_name = "HTML")]
    pub out: PathBuf,
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
    /// Plan the multivariate equivalence test instead: the margin ε on the Mahalanobis
    /// distance (--distance is then the true distance assumed, below ε).
    #[arg(long, value_name = "E", conflicts_with = "margin")]
    pub equivalence_distance: Option<f64>,
    /// Plan the two one-sided tests of one characteristic instead: the symmetric margin, in
    /// the characteristic's unit (needs --sd).
    #[arg(long, value_name = "M", requires = "sd", conflicts_with_all = ["characteristics", "distance", "from_summary"])]
    pub margin: Option<f64>,
    /// Standard deviation of the characteristic, for --margin.
    #[arg(long, value_name = "S", requires = "margin")]
    pub sd: Option<f64>,
    /// True difference between the lot means assumed, for --margin (default 0).
    #[arg(long, value_name = "D", requires = "margin", default_value_t = 0.0)]
    pub difference: f64,
}

/// Which lots to read and which characteristics to compare.
#[derive(Debug, Args)]
pub struct LotArgs {
    /// The reference lot file and the candidate lot file (or one file with --split-by).
    #[arg(value_name = "FILE", required = true, num_args = 1..=2)]
    pub files: Vec<PathBuf>,
    /// Lot column: the column holding each unit's lot, to read both lots from one file.
    #[arg(long, value_name = "COLUMN", alias = "split-by")]
    pub lot_column: Option<String>,
    /// Lot values: the two values of the lot column to compare, reference first ("A,B"),
    /// when the lot column holds more than two.
    #[arg(long, value_name = "REFERENCE,CANDIDATE")]
    pub lot_values: Option<String>,
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

/// Specification limits and equivalence margins.
#[derive(Debug, Args, Default)]
pub struct SpecArgs {
    /// Specification file (CSV, TSV or spreadsheet): one row per characteristic, a
    /// `characteristic` column and any of lower, target, upper, margin, margin_lower,
    /// margin_upper. Margins are the allowed candidate − reference difference, set in the
    /// quality plan before the data are seen.
    #[arg(long, value_name = "FILE")]
    pub spec: Option<PathBuf>,
    /// Margin for characteristics the file gives none: F × (upper − lower).
    #[arg(long, value_name = "F", conflicts_with = "margin_sd")]
    pub margin_fraction: Option<f64>,
    /// Margin for characteristics the file gives none: K × the reference lot's SD.
    #[arg(long, value_name = "K")]
    pub margin_sd: Option<f64>,
    /// Margin on the Mahalanobis distance between the lot means, for the multivariate
    /// equivalence test (default: derived from the per-characteristic margins).
    #[arg(long, value_name = "E")]
    pub equivalence_distance: Option<f64>,
}

impl SpecArgs {
    /// Reads the specification file and collects the margin options.
    ///
    /// # Errors
    /// The specification file's load error (file, row, column).
    pub fn request(&self) -> Result<SpecRequest, String> {
        let file = match &self.spec {
            Some(path) => Some(
                data::spec::load_spec(path, &LoadOptions::default()).map_err(|e| e.to_string())?,
            ),
            None => None,
        };
        let rule = match (self.margin_fraction, self.margin_sd) {
            (Some(f), _) => MarginRule::ToleranceFraction(f),
            (None, Some(k)) => MarginRule::ReferenceSd(k),
            (None, None) => MarginRule::FileOnly,
        };
        analysis::decision::check_rule(rule).map_err(|e| e.to_string())?;
        Ok(SpecRequest {
            file,
            rule,
            distance_margin: self.equivalence_distance,
            recorded: None,
        })
    }
}

/// Arguments of `compare`.
#[derive(Debug, Args)]
pub struct CompareArgs {
    /// Lots and characteristics.
    #[command(flatten)]
    pub lots: LotArgs,
    /// Specification limits and equivalence margins.
    #[command(flatten)]
    pub spec: SpecArgs,
    /// Significance level of the test; intervals are at 1 - alpha confidence.
    #[arg(long, default_value_t = 0.05)]
    pub alpha: f64,
    /// Write the comparison record as JSON to FILE, or to standard output with "-".
    #[arg(long, value_name = "FILE")]
    pub json: Option<String>,
    /// Exit with status 1 when the lots differ (for pipelines). Exit 0 then means "no
    /// difference detected": not "equivalent", and never an automatic release of a lot.
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
    /// Sign the summary with this private key (PEM); needs --meaning and --out.
    #[arg(long, value_name = "KEY", requires_all = ["meaning", "out"])]
    pub sign: Option<PathBuf>,
    /// Meaning of the signature: review, approval or authorship.
    #[arg(long, value_name = "MEANING", requires = "sign")]
    pub meaning: Option<String>,
    /// Printed name of the signer (default: the name stored beside the key by keygen).
    #[arg(long, value_name = "NAME", requires = "sign")]
    pub signer: Option<String>,
    /// Where to write the signed summary (JSON).
    #[arg(long, value_name = "FILE", requires = "sign")]
    pub out: Option<PathBuf>,
    /// Also write a self-contained HTML report of the comparison.
    #[arg(long, value_name = "HTML")]
    pub html: Option<PathBuf>,
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
    /// Exit with status 1 when the lots differ. Exit 0 then means "no difference detected":
    /// not "equivalent", and never an automatic release of a lot.
    #[arg(long)]
    pub fail_on_shift: bool,
    /// Specification limits and equivalence margins.
    #[command(flatten)]
    pub spec: SpecArgs,
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
        Command::Keygen(a) => keygen(a),
        Command::Verify(a) => verify(a),
        Command::Report(a) => report_html(a),
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
    let values = match &args.lot_values {
        None => None,
        Some(text) => Some(parse_lot_values(text)?),
    };
    if values.is_some() && args.lot_column.is_none() {
        return Err("--lot-values needs --lot-column: the column the two values are in".into());
    }
    let wanted = values.as_ref().map(|v| [v[0].as_str(), v[1].as_str()]);
    data::load_two(&args.files, args.lot_column.as_deref(), wanted, &options)
        .map_err(|e| e.to_string())
}

/// Splits `--lot-values REFERENCE,CANDIDATE` into its two values.
///
/// # Errors
/// When the text does not hold exactly two non-empty, distinct values.
pub fn parse_lot_values(text: &str) -> Result<[String; 2], String> {
    let parts: Vec<&str> = text.split(',').map(str::trim).collect();
    match parts.as_slice() {
        [a, b] if !a.is_empty() && !b.is_empty() && a != b => Ok([a.to_string(), b.to_string()]),
        [a, b] if a == b && !a.is_empty() => Err(format!(
            "--lot-values needs two different values (got \"{a}\" twice)"
        )),
        _ => Err(format!(
            "--lot-values takes the reference and the candidate value separated by a comma, \
             e.g. --lot-values A,B (got \"{text}\")"
        )),
    }
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
    // The specification first: a bad file stops before the lots are read.
    let spec = a.spec.request()?;
    let mut lots = load_lots(&a.lots)?;
    let request = Request {
        selection: Selection {
            only: a.lots.characteristics.clone(),
            exclude: a.lots.exclude.clone(),
        },
        settings: Settings {
            alpha: a.alpha,
            leave_one_out: !a.no_holdout,
            checks: !a.no_checks,
            permutations: a.permutations,
            seed: a.seed,
        },
        spec,
    };
    // The unit matrices take the numbers over, and the engine centres them in place: memory
    // holds one copy of the units.
    let (prepared, c) =
        pipeline::run_owned(&mut lots, &request, &Silent).map_err(|e| e.to_string())?;
    let mut record = Record::new(&c, Some((&prepared, [&lots[0], &lots[1]])));
    record.analysed_at = Some(sign::now_rfc3339());
    // Sign before printing anything, so a bad key or meaning stops with nothing written.
    let signed = match &a.sign {
        Some(key_path) => {
            let meaning_text = a.meaning.as_deref().unwrap_or_default();
            let meaning = sign::Meaning::parse(meaning_text).ok_or_else(|| {
                format!("--meaning must be review, approval or authorship (got \"{meaning_text}\")")
            })?;
            let key = sign::read_signing_key(key_path).map_err(|e| e.to_string())?;
            let signer = a.signer.clone().or_else(|| sign::signer_beside(key_path)).ok_or_else(|| {
                format!(
                    "no printed name for the signer: give --signer, or keep the .signer.json file \
                     keygen wrote beside {}",
                    key_path.display()
                )
            })?;
            Some(
                sign::sign(&record, &key, &signer, meaning, &sign::now_rfc3339())
                    .map_err(|e| e.to_string())?,
            )
        }
        None => None,
    };
    if a.json.as_deref() != Some("-") {
        let files = [
            lots[0].provenance.file_name.as_str(),
            lots[1].provenance.file_name.as_str(),
        ];
        out(&report::render_text(&c, Some(&prepared), files));
    }
    emit_json(&a.json, &record)?;
    if let (Some(summary), Some(out_path)) = (&signed, &a.out) {
        sign::write_summary(out_path, summary)
            .map_err(|e| format!("the signed summary was not written: {e}"))?;
        if a.json.as_deref() != Some("-") {
            outln!(
                "Signed summary written to {} (signed by {}, meaning {}, key {})",
                out_path.display(),
                summary.signature.signer,
                summary.signature.meaning,
                summary.signature.key_fingerprint
            );
        }
    }
    if let Some(html_path) = &a.html {
        let value = serde_json::to_value(&record).map_err(|e| e.to_string())?;
        let sig = signed
            .as_ref()
            .map(|s| serde_json::to_value(&s.signature).unwrap_or_default());
        let html = html::render_html(&value, sig.as_ref());
        report::write_atomic(html_path, html.as_bytes())
            .map_err(|e| format!("the report was not written: {e}"))?;
    }
    Ok(if a.fail_on_shift && c.hotelling.differ {
        ExitCode::from(EXIT_SHIFT)
    } else {
        ExitCode::SUCCESS
    })
}

fn keygen(a: KeygenArgs) -> CliResult {
    if a.signer.trim().is_empty() {
        return Err("--signer needs the printed name of the key's owner".into());
    }
    let private = sign::keygen(&a.out, &a.name, a.signer.trim()).map_err(|e| e.to_string())?;
    let (public, signer) = sign::key_companions(&private);
    outln!(
        "private key  {} (keep it to yourself; mode 0600)",
        private.display()
    );
    outln!(
        "public key   {} (give it to reviewers: lotshift verify --key)",
        public.display()
    );
    outln!("signer       {} ({})", a.signer.trim(), signer.display());
    Ok(ExitCode::SUCCESS)
}

/// Exit status when a signed summary does not verify.
pub const EXIT_NOT_VERIFIED: u8 = 1;

fn verify(a: VerifyArgs) -> CliResult {
    let text =
        std::fs::read_to_string(&a.file).map_err(|e| format!("{}: {e}", a.file.display()))?;
    let expected = match &a.key {
        Some(k) => Some(sign::read_verifying_key(k).map_err(|e| e.to_string())?),
        None => None,
    };
    let fail = |why: String| -> CliResult {
        outln!("NOT VERIFIED: {why}");
        eprintln!("lotshift: {}: not verified: {why}", a.file.display());
        Ok(ExitCode::from(EXIT_NOT_VERIFIED))
    };
    let summary = match sign::verify_signature(&text, expected.as_ref()) {
        Ok(s) => s,
        Err(e) => return fail(e.to_string()),
    };
    let sig = &summary.signature;
    outln!(
        "signature    valid: signed by {} on {} (UTC), meaning {}, key {}",
        sig.signer,
        sig.signed_at,
        sig.meaning,
        sig.key_fingerprint
    );
    if expected.is_some() {
        outln!("signer key   matches the expected public key");
    } else {
        outln!(
            "signer key   not checked against an expected key (give --key PUB to check who signed)"
        );
    }
    if a.files.is_empty() {
        outln!("lot files    not checked (give --files to check them and recompute every number)");
        outln!("VERIFIED (signature only)");
        return Ok(ExitCode::SUCCESS);
    }
    let rec = &summary.record;
    let lots_rec = rec["lots"].as_array().cloned().unwrap_or_default();
    if lots_rec.len() != 2 {
        return fail("the record does not describe two lots".into());
    }
    let split = lots_rec[0]["split"].as_array().map(|s| {
        s.iter()
            .map(|v| v.as_str().unwrap_or_default().to_string())
            .collect::<Vec<_>>()
    });
    let files: Vec<PathBuf> = match (a.files.len(), &split) {
        (1, Some(_)) => vec![a.files[0].clone()],
        (2, Some(_)) if std::fs::read(&a.files[0]).ok() == std::fs::read(&a.files[1]).ok() => {
            vec![a.files[0].clone()]
        }
        (2, _) => a.files.clone(),
        _ => {
            return fail(
                "give the two lot files (or the one file both lots were read from)".into(),
            );
        }
    };
    for (i, f) in files.iter().enumerate() {
        let bytes = std::fs::read(f).map_err(|e| format!("{}: {e}", f.display()))?;
        let got = crate::data::hex(&<sha2::Sha256 as sha2::Digest>::digest(&bytes));
        let want = lots_rec[i]["sha256"].as_str().unwrap_or_default();
        if got != want {
            return fail(format!(
                "lot file {} is not the file analysed: its SHA-256 is {got}, the record has {want}",
                f.display()
            ));
        }
        outln!("lot file     {} matches (SHA-256 {got})", f.display());
    }
    let options = LoadOptions {
        sheet: lots_rec[0]["sheet"].as_str().map(str::to_string),
        labels: lots_rec[0]["forced_labels"]
            .as_array()
            .map(|l| {
                l.iter()
                    .filter_map(|v| v.as_str().map(str::to_string))
                    .collect()
            })
            .unwrap_or_default(),
    };
    let lots = match &split {
        Some(s) if s.len() == 2 => {
            let value1 = lots_rec[1]["split"][1]
                .as_str()
                .unwrap_or_default()
                .to_string();
            data::load_two(
                &files,
                Some(&s[0]),
                Some([s[1].as_str(), value1.as_str()]),
                &options,
            )
        }
        _ => data::load_two(&files, None, None, &options),
    }
    .map_err(|e| e.to_string())?;
    let characteristics: Vec<String> = rec["characteristics"]
        .as_array()
        .map(|c| {
            c.iter()
                .filter_map(|v| v.as_str().map(str::to_string))
                .collect()
        })
        .unwrap_or_default();
    let settings: Settings = serde_json::from_value(rec["settings"].clone())
        .map_err(|e| format!("record settings: {e}"))?;
    let recorded_spec: Option<analysis::decision::Specification> =
        serde_json::from_value(rec.get("specification").cloned().unwrap_or_default())
            .map_err(|e| format!("record specification: {e}"))?;
    let spec = match (&a.spec, recorded_spec) {
        (None, recorded) => SpecRequest {
            recorded,
            ..SpecRequest::default()
        },
        (Some(_), None) => {
            return fail(
                "--spec was given, but the record was made without a specification".into(),
            );
        }
        (Some(path), Some(recorded)) => {
            let file =
                data::spec::load_spec(path, &LoadOptions::default()).map_err(|e| e.to_string())?;
            let want = recorded.sha256.clone().unwrap_or_default();
            if file.sha256 != want {
                return fail(format!(
                    "specification file {} is not the file used: its SHA-256 is {}, the record \
                     has {}",
                    path.display(),
                    file.sha256,
                    if want.is_empty() {
                        "none (margins from a rule only)"
                    } else {
                        &want
                    }
                ));
            }
            outln!(
                "spec file    {} matches (SHA-256 {})",
                path.display(),
                file.sha256
            );
            SpecRequest {
                file: Some(file),
                rule: recorded.rule,
                distance_margin: recorded.distance_margin,
                recorded: None,
            }
        }
    };
    let request = Request {
        selection: Selection {
            only: Some(characteristics),
            exclude: Vec::new(),
        },
        settings,
        spec,
    };
    let mut lots = lots;
    let (prepared, c) =
        pipeline::run_owned(&mut lots, &request, &Silent).map_err(|e| e.to_string())?;
    let recomputed = serde_json::to_value(Record::new(&c, Some((&prepared, [&lots[0], &lots[1]]))))
        .map_err(|e| e.to_string())?;
    if let Some(diff) = sign::first_difference(rec, &recomputed) {
        return fail(format!("a recomputed number differs: {diff}"));
    }
    outln!("recomputed   every number in the record matches the lot files");
    outln!("VERIFIED");
    Ok(ExitCode::SUCCESS)
}

fn report_html(a: ReportArgs) -> CliResult {
    let text =
        std::fs::read_to_string(&a.file).map_err(|e| format!("{}: {e}", a.file.display()))?;
    let doc: serde_json::Value =
        serde_json::from_str(&text).map_err(|e| format!("{}: not JSON: {e}", a.file.display()))?;
    let html = if doc.get("signature").is_some() && doc.get("record").is_some() {
        match sign::verify_signature(&text, None) {
            Ok(_) => eprintln!(
                "lotshift: the signature verifies (use lotshift verify to check the lot files too)"
            ),
            Err(e) => eprintln!("lotshift: warning: {e}"),
        }
        html::render_html(&doc["record"], Some(&doc["signature"]))
    } else if doc.get("schema").and_then(|s| s.as_str()) == Some(report::SCHEMA) {
        html::render_html(&doc, None)
    } else {
        return Err(format!(
            "{}: neither a comparison record nor a signed summary",
            a.file.display()
        ));
    };
    report::write_atomic(&a.out, html.as_bytes())
        .map_err(|e| format!("the report was not written: {e}"))?;
    outln!("report written to {}", a.out.display());
    Ok(ExitCode::SUCCESS)
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
    let mut c = analysis::compare_summaries(&spec.characteristics, &units, [l1, l2], &settings)
        .map_err(|e| format!("{}: {e}", a.file.display()))?;
    let plan = a.spec.request()?;
    if !plan.is_empty() {
        let given = plan
            .specification(&c.characteristics, &c.units)
            .map_err(|e| e.to_string())?;
        analysis::apply_specification(&mut c, &given, None).map_err(|e| e.to_string())?;
    }
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
        outln!("decimal     {}", p.decimal_mark);
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
    if let Some(margin) = a.margin {
        return plan_tost(&a, margin);
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
    if let Some(eps) = a.equivalence_distance {
        return plan_t2_equivalence(&a, p, delta2.sqrt(), eps, &source);
    }
    outln!("Power of Hotelling's T² at alpha {} for {source}", a.alpha);
    outln!(
        "  (assumes multivariate normal lots with equal covariance matrices; the sampling plan \
         itself is set by your quality system)"
    );
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

/// `plan --equivalence-distance`: power and units per lot of the T² equivalence test.
fn plan_t2_equivalence(
    a: &PlanArgs,
    p: usize,
    delta: f64,
    epsilon: f64,
    source: &str,
) -> CliResult {
    use crate::stats::equivalence::{t2_equivalence_power, t2_equivalence_units_per_lot};
    if !(epsilon > 0.0 && epsilon.is_finite()) {
        return Err(format!(
            "--equivalence-distance must be a positive number (got {epsilon})"
        ));
    }
    if delta >= epsilon {
        return Err(format!(
            "the true distance {} must lie below the margin {epsilon}: at or beyond the margin \
             no lot size shows equivalence",
            format_sig(delta, 4)
        ));
    }
    outln!(
        "Power of the T² equivalence test at alpha {} for {source}, margin ε = {epsilon}",
        a.alpha
    );
    outln!(
        "  (assumes multivariate normal lots with equal covariance matrices; margins belong to \
         the quality plan, and the sampling plan itself is set by your quality system)"
    );
    outln!("  characteristics            {p}");
    outln!("  true distance assumed      {}", format_sig(delta, 4));
    if let Some(n) = a.units {
        let pw = t2_equivalence_power(p, n, n, delta, epsilon, a.alpha)
            .map_err(|e| format!("{n} units per lot: {e}"))?;
        outln!("  power with {n} units per lot   {}", format_sig(pw, 4));
    }
    match t2_equivalence_units_per_lot(p, delta, epsilon, a.alpha, a.target_power) {
        Some(n) => outln!(
            "  units per lot for power {}   {n}  (power {})",
            a.target_power,
            format_sig(
                t2_equivalence_power(p, n, n, delta, epsilon, a.alpha).unwrap_or(f64::NAN),
                4
            )
        ),
        None => outln!("  no lot size up to 10^8 reaches power {}", a.target_power),
    }
    Ok(ExitCode::SUCCESS)
}

/// `plan --margin`: power and units per lot of the two one-sided tests (pooled variance).
fn plan_tost(a: &PlanArgs, margin: f64) -> CliResult {
    use crate::stats::equivalence::{tost_power, tost_units_per_lot};
    let sd = a.sd.unwrap_or(f64::NAN);
    if !(margin > 0.0 && margin.is_finite() && sd > 0.0 && sd.is_finite()) {
        return Err(format!(
            "--margin and --sd must be positive numbers (got {margin} and {sd})"
        ));
    }
    let theta = a.difference;
    if theta.abs() >= margin {
        return Err(format!(
            "the true difference {theta} must lie inside the margin ±{margin}: at or beyond it \
             no lot size shows equivalence"
        ));
    }
    let m = [-margin, margin];
    outln!(
        "Power of the two one-sided tests at alpha {} for a margin of ±{margin}, SD {sd} and a \
         true difference of {theta}",
        a.alpha
    );
    outln!(
        "  (assumes normal lots with a common SD; margins belong to the quality plan, and the \
         sampling plan itself is set by your quality system)"
    );
    if let Some(n) = a.units {
        let pw = tost_power(theta, sd, n, n, m, a.alpha)
            .map_err(|e| format!("{n} units per lot: {e}"))?;
        outln!("  power with {n} units per lot   {}", format_sig(pw, 4));
    }
    match tost_units_per_lot(theta, sd, m, a.alpha, a.target_power) {
        Some(n) => outln!(
            "  units per lot for power {}   {n}  (power {})",
            a.target_power,
            format_sig(
                tost_power(theta, sd, n, n, m, a.alpha).unwrap_or(f64::NAN),
                4
            )
        ),
        None => outln!("  no lot size up to 10^8 reaches power {}", a.target_power),
    }
    Ok(ExitCode::SUCCESS)
}
