//! Arguments of every subcommand.

#[allow(unused_imports)]
use super::*;

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
    /// Read the passphrase that protects the new key from the first line of FILE ("-":
    /// standard input) instead of asking for it twice on the terminal.
    #[arg(long, value_name = "FILE")]
    pub passphrase_file: Option<PathBuf>,
}

/// Arguments of `sign`.
#[derive(Debug, Args)]
pub struct SignArgs {
    /// The signed summary to add a signature to (rewritten in place, atomically, unless
    /// --out is given), or a comparison protocol to sign (its signatures are kept beside it,
    /// in NAME.signatures.json, unless --out is given).
    #[arg(value_name = "SUMMARY|PROTOCOL")]
    pub file: PathBuf,
    /// The signer's private key (PEM).
    #[arg(long, value_name = "KEY")]
    pub key: PathBuf,
    /// Meaning of the signature: authorship, review or approval.
    #[arg(long, value_name = "MEANING")]
    pub meaning: String,
    /// The signer's comment, kept in the signature (e.g. what was checked).
    #[arg(long, value_name = "TEXT", default_value = "")]
    pub comment: String,
    /// Printed name of the signer (default: the name stored beside the key by keygen).
    #[arg(long, value_name = "NAME")]
    pub signer: Option<String>,
    /// Read the key's passphrase from the first line of FILE ("-": standard input) instead
    /// of asking for it on the terminal.
    #[arg(long, value_name = "FILE")]
    pub passphrase_file: Option<PathBuf>,
    /// Write the signed summary here instead of over SUMMARY (for a protocol: its
    /// signatures file here instead of beside it).
    #[arg(long, value_name = "FILE")]
    pub out: Option<PathBuf>,
}

/// Arguments of `trust`.
#[derive(Debug, Args)]
pub struct TrustArgs {
    /// The signer's public key (PEM, as keygen writes it: NAME.pub.pem).
    #[arg(value_name = "PUB")]
    pub key: PathBuf,
    /// The printed name the key is issued to, exactly as the signer signs.
    #[arg(long, value_name = "NAME")]
    pub name: String,
    /// The roles the signer may sign in: author, reviewer, approver (comma-separated).
    #[arg(long, value_name = "ROLE,...", value_delimiter = ',', required = true)]
    pub role: Vec<String>,
    /// The trusted-signers list to add the signer to (made when absent).
    #[arg(long, value_name = "FILE")]
    pub trusted: PathBuf,
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
    /// The trusted-signers list: every signature must be by a key in it, under the printed
    /// name listed, in a role the list gives (without it, at best PARTIALLY VERIFIED).
    #[arg(long, value_name = "FILE")]
    pub trusted: Option<PathBuf>,
    /// A public key (PEM) that must have made one of the signatures (may be repeated).
    #[arg(long, value_name = "PUB")]
    pub key: Vec<PathBuf>,
    /// The specification file the comparison used: checks its SHA-256 and recomputes from
    /// the file's limits and margins (without it, from the ones the record holds).
    #[arg(long, value_name = "FILE")]
    pub spec: Option<PathBuf>,
    /// The comparison protocol the comparison was run under: checks its SHA-256.
    #[arg(long, value_name = "FILE")]
    pub protocol: Option<PathBuf>,
    /// The window's audit trail: checks its chain and that the record's runs are in it.
    #[arg(long, value_name = "FILE")]
    pub trail: Option<PathBuf>,
    /// Lots read from a database: run the recorded query again on the recorded database
    /// (the password from LOTSHIFT_DB_PASSWORD), check the rows' SHA-256 and recompute every
    /// number (inside the database when the comparison was made there).
    #[arg(long, conflicts_with = "files")]
    pub database: bool,
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
    /// The reference lot file and the candidate lot file (or one file with --split-by); with
    /// --protocol, the protocol's files when none are given.
    #[arg(value_name = "FILE", required_unless_present_any = ["protocol", "database"], num_args = 1..=2)]
    pub files: Vec<PathBuf>,
    /// Read both lots from a database instead of files: sqlite:PATH or
    /// postgresql://user@host:port/dbname (the password from LOTSHIFT_DB_PASSWORD). Needs
    /// --query and --lot-column.
    #[arg(long, value_name = "URL", conflicts_with = "files", requires_all = ["query", "lot_column"])]
    pub database: Option<String>,
    /// The SELECT whose rows are the units of both lots (with --database); it runs read-only.
    #[arg(long, value_name = "SQL", requires = "database")]
    pub query: Option<String>,
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
    /// Every numeric column must be compared: a column the lots do not line up on (missing
    /// from one lot, text in the other, empty) is an error (exit status 2) instead of a note.
    #[arg(long)]
    pub strict_columns: bool,
    /// Units to set aside, each with its reason: a table with `lot` (reference or candidate),
    /// `reason`, and `row` or a label column such as the serial number. The lot files stay
    /// untouched; the exclusions go into the record and the signature.
    #[arg(long, value_name = "FILE")]
    pub exclude_units: Option<PathBuf>,
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
    /// True when any specification option is given.
    pub fn given(&self) -> bool {
        self.spec.is_some()
            || self.margin_fraction.is_some()
            || self.margin_sd.is_some()
            || self.equivalence_distance.is_some()
    }

    /// Reads the specification file and collects the margin options.
    ///
    /// # Errors
    /// The specification file's load error (file, row, column).
    pub fn request(&self) -> Result<SpecRequest, CliError> {
        let file = match &self.spec {
            Some(path) => Some(data::spec::load_spec(path, &LoadOptions::default())?),
            None => None,
        };
        let rule = match (self.margin_fraction, self.margin_sd) {
            (Some(f), _) => MarginRule::ToleranceFraction(f),
            (None, Some(k)) => MarginRule::ReferenceSd(k),
            (None, None) => MarginRule::FileOnly,
        };
        analysis::decision::check_rule(rule)?;
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
    /// Significance level of the test; intervals are at 1 - alpha confidence [default: 0.05].
    #[arg(long)]
    pub alpha: Option<f64>,
    /// Run the comparison protocol in FILE (lots, characteristics, settings, specification
    /// fixed in advance); an option given besides that changes it is a deviation.
    #[arg(long, value_name = "FILE")]
    pub protocol: Option<PathBuf>,
    /// With --protocol: run the options given that differ from the protocol, recording each
    /// difference as a deviation with this reason.
    #[arg(long, value_name = "REASON", requires = "protocol")]
    pub deviation: Option<String>,
    /// With --database: compute the comparison inside the database from aggregate
    /// statements (no unit leaves it); what needs every unit is reported as not computed.
    #[arg(long, requires = "database")]
    pub in_database: bool,
    /// With --protocol: check the protocol's signers against this trusted-signers list.
    #[arg(long, value_name = "FILE", requires = "protocol")]
    pub trusted: Option<PathBuf>,
    /// Write the comparison record as JSON to FILE, or to standard output with "-".
    #[arg(long, value_name = "FILE")]
    pub json: Option<String>,
    /// Exit with status 1 when the lots differ (for pipelines). Exit 0 then means "no
    /// difference detected": not "equivalent", and never an automatic release of a lot.
    #[arg(long)]
    pub fail_on_shift: bool,
    /// Describe the comparison in the record and the report, as NAME=VALUE (repeat it):
    /// part, reference lot, candidate lot, change request, purpose, notes, or a name of your
    /// own.
    #[arg(long = "field", value_name = "NAME=VALUE")]
    pub fields: Vec<String>,
    /// Skip the leave-one-out misclassification rate.
    #[arg(long)]
    pub no_holdout: bool,
    /// Skip the assumption checks (Box's M, Mardia, Shapiro–Wilk, outliers, unequal covariance).
    #[arg(long)]
    pub no_checks: bool,
    /// Relabellings for the permutation p-value (0 skips it) [default: 9999].
    #[arg(long)]
    pub permutations: Option<usize>,
    /// Seed of the permutation draws (the same seed gives the same p-value) [default:
    /// 20261202].
    #[arg(long)]
    pub seed: Option<u64>,
    /// Draw every relabelling asked for (turns sequential stopping off).
    #[arg(long, conflicts_with_all = ["stop_hits", "decision_risk"])]
    pub draw_all: bool,
    /// Stop the relabellings at the N-th whose T² reaches the observed one, p = N/draws
    /// (Besag & Clifford 1991; 0 turns this rule off) [default: 10].
    #[arg(long, value_name = "N")]
    pub stop_hits: Option<usize>,
    /// Stop the relabellings once the decision at alpha is settled, with at most this chance
    /// that all possible relabellings would decide otherwise (Gandy 2009; 0 turns this rule
    /// off) [default: 0.001].
    #[arg(long, value_name = "RISK")]
    pub decision_risk: Option<f64>,
    /// Sign the summary with this private key (PEM); needs --meaning and --out.
    #[arg(long, value_name = "KEY", requires_all = ["meaning", "out"])]
    pub sign: Option<PathBuf>,
    /// Meaning of the signature: review, approval or authorship.
    #[arg(long, value_name = "MEANING", requires = "sign")]
    pub meaning: Option<String>,
    /// The signer's comment, kept in the signature.
    #[arg(long, value_name = "TEXT", requires = "sign")]
    pub comment: Option<String>,
    /// Read the key's passphrase from the first line of FILE ("-": standard input) instead
    /// of asking for it on the terminal.
    #[arg(long, value_name = "FILE", requires = "sign")]
    pub passphrase_file: Option<PathBuf>,
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

/// Arguments of `statements`.
#[derive(Debug, Args)]
pub struct StatementsArgs {
    /// SQL dialect: generic (plain SQL), sqlite or postgresql.
    #[arg(long, value_name = "NAME", default_value = "generic")]
    pub dialect: String,
    /// The SELECT whose rows are the units of both lots.
    #[arg(long, value_name = "SQL")]
    pub query: String,
    /// The result's column holding each unit's lot.
    #[arg(long, value_name = "COLUMN")]
    pub lot_column: String,
    /// The reference and the candidate value of the lot column ("A,B").
    #[arg(long, value_name = "REFERENCE,CANDIDATE")]
    pub lot_values: String,
    /// The characteristics: the result's column names, in comparison order.
    #[arg(long, value_name = "COL,...", value_delimiter = ',', required = true)]
    pub characteristics: Vec<String>,
}

/// Arguments of `compare-stats`.
#[derive(Debug, Args)]
pub struct StatsArgs {
    /// JSON file with `characteristics` and two `lots`, each `{name, n, mean, covariance}`;
    /// or the result of `lotshift statements`, saved as CSV (one row per lot; needs
    /// --characteristics).
    #[arg(value_name = "FILE")]
    pub file: PathBuf,
    /// For a statements result: the characteristics, in the order given to `statements`.
    #[arg(long, value_name = "COL,...", value_delimiter = ',')]
    pub characteristics: Option<Vec<String>>,
    /// For a statements result: the reference and candidate value ("A,B"; default: the rows'
    /// order).
    #[arg(long, value_name = "REFERENCE,CANDIDATE")]
    pub lot_values: Option<String>,
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
pub(crate) struct StatsFile {
    pub(crate) characteristics: Vec<String>,
    #[serde(default)]
    pub(crate) units: Vec<Option<String>>,
    #[serde(default)]
    pub(crate) alpha: Option<f64>,
    pub(crate) lots: Vec<SummaryLot>,
}

impl CompareArgs {
    /// Sequential stopping as the options ask (`None` with `--draw-all`).
    ///
    /// # Errors
    /// A risk outside 0 to 1.
    /// `base` is what the run starts from (the defaults, or a protocol's settings): an
    /// option given replaces its part.
    pub fn sequential(
        &self,
        base: Option<analysis::Sequential>,
    ) -> Result<Option<analysis::Sequential>, CliError> {
        if self.draw_all {
            return Ok(None);
        }
        if self.stop_hits.is_none() && self.decision_risk.is_none() {
            return Ok(base);
        }
        let start = base.unwrap_or_default();
        let risk = self.decision_risk.unwrap_or(start.risk);
        if !(0.0..1.0).contains(&risk) {
            return Err(CliError::from(format!(
                "--decision-risk must be at least 0 and below 1 (got {risk})"
            )));
        }
        Ok(Some(analysis::Sequential {
            hits: self.stop_hits.unwrap_or(start.hits),
            risk,
        }))
    }
}
