//! The command line: one file per subcommand; `args` holds every subcommand's arguments.
//! No subcommand opens the window (src/gui).

use std::path::PathBuf;
use std::process::ExitCode;

use clap::{Args, Parser, Subcommand};

use crate::analysis::decision::MarginRule;
use crate::analysis::{self, Settings, Silent, SummaryLot};
use crate::data::{self, ColumnData, LoadOptions, Lot, Selection};
use crate::format::format_sig;
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

pub use crate::exit::{EXIT_BAD_INPUT, EXIT_NOT_VERIFIED, EXIT_PARTIALLY_VERIFIED, EXIT_SHIFT};

mod args;
mod compare;
mod inspect;
mod keys;
mod plan;
mod signing;
mod verify;

pub use args::*;
use compare::{compare, compare_stats};
use inspect::inspect;
use keys::keygen;
use plan::plan;
use signing::{sign_summary, trust};
use verify::{report_html, verify};

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
    /// direction, specification).
    #[arg(long, value_name = "VIEW")]
    pub view: Option<String>,
    /// Specification file (limits and margins) to open in the window's Specification tab.
    #[arg(long, value_name = "FILE")]
    pub spec: Option<PathBuf>,
    /// Comparison protocol to run under in the window (its lots, unless lot files are given).
    #[arg(long, value_name = "FILE")]
    pub protocol: Option<PathBuf>,
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
    /// Print the aggregate SQL of an in-database comparison, for an engine lotshift cannot
    /// reach; save its result as CSV and read it with compare-stats.
    Statements(StatementsArgs),
    /// Power of the test for a given shift and lot size, or the lot size for a target power.
    Plan(PlanArgs),
    /// Make an Ed25519 signing key pair for signed summaries.
    Keygen(KeygenArgs),
    /// Add a signature (review, approval, …) to a signed summary whose signatures verify.
    Sign(SignArgs),
    /// Add a signer's public key, printed name and roles to a trusted-signers list.
    Trust(TrustArgs),
    /// Check a signed summary: its signatures, the signers against a trusted list, and with
    /// the lot files, every number.
    Verify(VerifyArgs),
    /// Render a record or signed summary as a self-contained HTML page.
    Report(ReportArgs),
}

pub(crate) type CliResult = Result<ExitCode, CliError>;

/// Why a subcommand could not do its job. Every kind exits with status 2
/// ([`EXIT_BAD_INPUT`]) and one line on standard error; the kinds keep the engine's and the
/// loaders' own errors (file, row, column) instead of flattening them to text.
#[derive(Debug, thiserror::Error)]
pub enum CliError {
    /// A lot, specification or exclusion file that cannot be read.
    #[error(transparent)]
    Load(#[from] crate::data::LoadError),
    /// The comparison could not be made.
    #[error(transparent)]
    Pipeline(#[from] crate::pipeline::PipelineError),
    /// A margin rule that does not fit.
    #[error(transparent)]
    Decision(#[from] crate::analysis::decision::DecisionError),
    /// The engine could not compare (summary-statistics input).
    #[error(transparent)]
    Engine(#[from] crate::stats::EngineError),
    /// A key, a signature or a summary file.
    #[error(transparent)]
    Sign(#[from] crate::report::sign::SignError),
    /// A database that cannot be read.
    #[error(transparent)]
    Source(#[from] crate::source::SourceError),
    /// The comparison inside a database stopped.
    #[error(transparent)]
    Aggregate(#[from] crate::source::aggregate::AggregateError),
    /// A trusted-signers list.
    #[error(transparent)]
    Trust(#[from] crate::report::trust::TrustError),
    /// A comparison protocol that cannot be used.
    #[error(transparent)]
    Protocol(#[from] crate::protocol::ProtocolError),
    /// Options that do not fit together, an output that cannot be written, a file that is not
    /// what the subcommand reads: the reason in words.
    #[error("{0}")]
    Failed(String),
}

impl From<String> for CliError {
    fn from(s: String) -> Self {
        CliError::Failed(s)
    }
}

impl From<&str> for CliError {
    fn from(s: &str) -> Self {
        CliError::Failed(s.to_string())
    }
}

/// Runs a subcommand; returns the process exit status.
pub fn run(command: Command) -> ExitCode {
    let result = match command {
        Command::Compare(a) => compare(a),
        Command::CompareStats(a) => compare_stats(a),
        Command::Statements(a) => compare::statements(a),
        Command::Inspect(a) => inspect(a),
        Command::Plan(a) => plan(a),
        Command::Keygen(a) => keygen(a),
        Command::Sign(a) => sign_summary(a),
        Command::Trust(a) => trust(a),
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
/// The load error (file, row, column), or options that do not fit together.
pub fn load_lots(args: &LotArgs) -> Result<[Lot; 2], CliError> {
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
    if let Some(source) = query_source(args)? {
        return Ok(crate::source::load_lots(&source, None, &options)?);
    }
    let wanted = values.as_ref().map(|v| [v[0].as_str(), v[1].as_str()]);
    Ok(data::load_two(
        &args.files,
        args.lot_column.as_deref(),
        wanted,
        &options,
    )?)
}

/// The database source named by `--database`, `--query`, `--lot-column` and `--lot-values`
/// (`None` for files).
///
/// # Errors
/// A URL lotshift does not read, a missing query or lot column, bad lot values.
pub fn query_source(args: &LotArgs) -> Result<Option<crate::source::QuerySource>, CliError> {
    let Some(url) = &args.database else {
        return Ok(None);
    };
    let database = crate::source::Database::parse(url)?;
    let query = args
        .query
        .clone()
        .ok_or("--database needs --query: the SELECT whose rows are the units")?;
    let lot_column = args
        .lot_column
        .clone()
        .ok_or("--database needs --lot-column: the result's column holding each unit's lot")?;
    let lot_values = match &args.lot_values {
        Some(text) => Some(parse_lot_values(text)?),
        None => None,
    };
    Ok(Some(crate::source::QuerySource {
        database,
        query,
        lot_column,
        lot_values,
    }))
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
