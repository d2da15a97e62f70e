//! Lots where the data live: a database query's rows read as a lot table (SQLite built into
//! the program, PostgreSQL over its own protocol), and the comparison computed inside the
//! database from aggregate statements ([`aggregate`], [`statements`]).
//!
//! Every query runs read-only: SQLite through a read-only connection whose statements are
//! checked not to write, PostgreSQL inside a `READ ONLY` transaction that is rolled back.
//! The password never comes from the URL (which goes into the record): it comes from the
//! environment variable [`PASSWORD_VAR`] or the window's password field, and is scrubbed
//! from every message.

pub mod aggregate;
mod pg;
mod sqlite;
pub mod statements;

use sha2::{Digest as _, Sha256};

use crate::data::{self, LoadError, LoadOptions, Lot, Provenance, RawCell};

/// Environment variable holding the database password.
pub const PASSWORD_VAR: &str = "LOTSHIFT_DB_PASSWORD";

/// Which SQL the generated statements are written in.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Dialect {
    /// SQLite (parameters `?1`, `?2`).
    Sqlite,
    /// PostgreSQL (parameters `$1`, `$2`).
    Postgres,
    /// Plain SQL with the lot values written as quoted literals, for an engine lotshift
    /// cannot reach (the statements are printed, not run).
    Generic,
}

impl Dialect {
    /// Parses a dialect name.
    ///
    /// # Errors
    /// An unknown name, in words.
    pub fn parse(s: &str) -> Result<Dialect, String> {
        match s.to_ascii_lowercase().as_str() {
            "sqlite" => Ok(Dialect::Sqlite),
            "postgresql" | "postgres" => Ok(Dialect::Postgres),
            "generic" | "sql" | "ansi" => Ok(Dialect::Generic),
            _ => Err(format!(
                "unknown SQL dialect \"{s}\"; use sqlite, postgresql or generic"
            )),
        }
    }
}

/// A database to read from.
#[derive(Debug, Clone, PartialEq)]
pub enum Database {
    /// An SQLite file, opened read-only.
    Sqlite {
        /// The file.
        path: std::path::PathBuf,
        /// The URL as given.
        url: String,
    },
    /// A PostgreSQL server.
    Postgres {
        /// The URL as given (it holds no password).
        url: String,
    },
}

impl Database {
    /// Parses `sqlite:PATH` or `postgresql://user@host:port/dbname` (also `postgres://`, and
    /// `?host=/socket/folder` for a Unix socket).
    ///
    /// # Errors
    /// Another scheme, an empty path, or a password written into the URL.
    pub fn parse(url: &str) -> Result<Database, SourceError> {
        let url = url.trim();
        if let Some(rest) = url.strip_prefix("sqlite:") {
            let path = rest.strip_prefix("//").unwrap_or(rest);
            if path.is_empty() {
                return Err(SourceError::Url(
                    "sqlite: needs the database file, as sqlite:PATH".into(),
                ));
            }
            return Ok(Database::Sqlite {
                path: path.into(),
                url: url.to_string(),
            });
        }
        if let Some(rest) = url
            .strip_prefix("postgresql://")
            .or_else(|| url.strip_prefix("postgres://"))
        {
            let authority = rest.split(['/', '?']).next().unwrap_or("");
            if let Some((userinfo, _)) = authority.rsplit_once('@')
                && userinfo.contains(':')
            {
                let user = userinfo.split(':').next().unwrap_or("");
                return Err(SourceError::Url(format!(
                    "the URL holds a password; write it as postgresql://{user}@… and put the \
                     password in the environment variable {PASSWORD_VAR} (the URL goes into \
                     the record)"
                )));
            }
            return Ok(Database::Postgres {
                url: url.to_string(),
            });
        }
        Err(SourceError::Url(format!(
            "\"{}\" is not a database URL lotshift reads; use sqlite:PATH or \
             postgresql://user@host:port/dbname",
            data::error_shorten(url)
        )))
    }

    /// The URL as shown in messages and written into the record.
    pub fn url(&self) -> &str {
        match self {
            Database::Sqlite { url, .. } | Database::Postgres { url } => url,
        }
    }

    /// The record's name for the kind of source.
    pub fn kind(&self) -> &'static str {
        match self {
            Database::Sqlite { .. } => "sqlite",
            Database::Postgres { .. } => "postgresql",
        }
    }

    /// The dialect the generated statements use here.
    pub fn dialect(&self) -> Dialect {
        match self {
            Database::Sqlite { .. } => Dialect::Sqlite,
            Database::Postgres { .. } => Dialect::Postgres,
        }
    }

    /// Opens a read-only session. `password` is used for PostgreSQL (from [`PASSWORD_VAR`]
    /// when `None`).
    ///
    /// # Errors
    /// The server cannot be reached, the login is refused, the SQLite file does not exist.
    pub fn connect(&self, password: Option<&str>) -> Result<Session, SourceError> {
        let from_env = std::env::var(PASSWORD_VAR).ok();
        let password = password
            .map(str::to_string)
            .or(from_env)
            .filter(|p| !p.is_empty());
        let inner: Box<dyn Engine> = match self {
            Database::Sqlite { path, url } => Box::new(sqlite::Sqlite::open(path, url)?),
            Database::Postgres { url } => Box::new(
                pg::Postgres::connect(url, password.as_deref())
                    .map_err(|e| e.scrubbed(password.as_deref()))?,
            ),
        };
        Ok(Session {
            inner,
            password,
            url: self.url().to_string(),
        })
    }
}

/// A query's result: column names and rows of cells.
#[derive(Debug, Clone, Default, PartialEq)]
pub struct ResultTable {
    /// Column names in order.
    pub columns: Vec<String>,
    /// Rows.
    pub rows: Vec<Vec<RawCell>>,
}

impl ResultTable {
    /// The result's size as PostgreSQL's protocol sends it: per row a 7-byte header, per cell
    /// a 4-byte length and its value (8 bytes for a number in binary form, the text's bytes
    /// otherwise, nothing for a NULL). SQLite runs in the process; the same count stands for
    /// what a server would send.
    pub fn wire_bytes(&self) -> u64 {
        self.rows
            .iter()
            .map(|r| {
                7 + r
                    .iter()
                    .map(|c| {
                        4 + match c {
                            RawCell::Null => 0,
                            RawCell::Number(_) => 8,
                            RawCell::Text(t) => t.len() as u64,
                        }
                    })
                    .sum::<u64>()
            })
            .sum()
    }
}

/// What runs the statements (one per kind of database).
pub(crate) trait Engine: Send {
    /// Runs the user's query, read-only, every value as the database gives it.
    fn user_query(&mut self, sql: &str) -> Result<ResultTable, SourceError>;
    /// Runs a generated statement with text parameters.
    fn statement(&mut self, sql: &str, params: &[&str]) -> Result<ResultTable, SourceError>;
}

/// An open read-only session on a database.
pub struct Session {
    inner: Box<dyn Engine>,
    password: Option<String>,
    url: String,
}

impl Session {
    /// Runs the user's query (one SELECT statement).
    ///
    /// # Errors
    /// The database's refusal in one line; a statement that would write is refused before it
    /// runs (SQLite) or by the read-only transaction (PostgreSQL), and changes nothing.
    pub fn query(&mut self, sql: &str) -> Result<ResultTable, SourceError> {
        if sql.trim().is_empty() {
            return Err(SourceError::Query {
                url: self.url.clone(),
                why: "the query is empty".into(),
            });
        }
        self.inner
            .user_query(sql)
            .map_err(|e| e.scrubbed(self.password.as_deref()))
    }

    /// Runs a generated statement.
    ///
    /// # Errors
    /// As [`Session::query`].
    pub fn statement(&mut self, sql: &str, params: &[&str]) -> Result<ResultTable, SourceError> {
        self.inner
            .statement(sql, params)
            .map_err(|e| e.scrubbed(self.password.as_deref()))
    }
}

/// Why a database source could not be read. Messages hold no password.
#[derive(Debug, Clone, PartialEq, thiserror::Error)]
pub enum SourceError {
    /// A URL lotshift does not read.
    #[error("{0}")]
    Url(String),
    /// The server or file cannot be reached.
    #[error("{url}: cannot connect: {why}")]
    Connect {
        /// The URL.
        url: String,
        /// Why, in one line.
        why: String,
    },
    /// The server refused the login.
    #[error(
        "{url}: the server refused the login: {why} (the password is read from the environment \
         variable LOTSHIFT_DB_PASSWORD)"
    )]
    Login {
        /// The URL.
        url: String,
        /// Why, in one line.
        why: String,
    },
    /// The query failed.
    #[error("{url}: the query failed: {why}")]
    Query {
        /// The URL.
        url: String,
        /// Why, in one line.
        why: String,
    },
    /// The query would change the database.
    #[error(
        "{url}: the query would change the database, and lotshift only reads: give one SELECT \
         statement (nothing was changed)"
    )]
    Writes {
        /// The URL.
        url: String,
    },
    /// The result does not make two lots (no rows, no lot column, one lot value...).
    #[error(transparent)]
    Load(#[from] LoadError),
}

impl SourceError {
    /// The same error with every occurrence of the password removed.
    fn scrubbed(self, password: Option<&str>) -> SourceError {
        let Some(pw) = password.filter(|p| !p.is_empty()) else {
            return self;
        };
        let clean = |s: String| s.replace(pw, "•••");
        match self {
            SourceError::Url(s) => SourceError::Url(clean(s)),
            SourceError::Connect { url, why } => SourceError::Connect {
                url,
                why: clean(why),
            },
            SourceError::Login { url, why } => SourceError::Login {
                url,
                why: clean(why),
            },
            SourceError::Query { url, why } => SourceError::Query {
                url,
                why: clean(why),
            },
            other => other,
        }
    }
}

/// One line of a driver's message.
pub(crate) fn one_line(s: &str) -> String {
    s.split_whitespace().collect::<Vec<_>>().join(" ")
}

/// A lot source: where the rows come from and which column tells the lots apart.
#[derive(Debug, Clone, PartialEq)]
pub struct QuerySource {
    /// The database.
    pub database: Database,
    /// The user's query.
    pub query: String,
    /// The column holding each unit's lot.
    pub lot_column: String,
    /// The two values to compare, reference first (needed when the column holds more).
    pub lot_values: Option<[String; 2]>,
}

/// The SHA-256 of a lot's rows as a canonical stream: each row's cells (NULL as byte 0, any
/// other value as byte 1 and its text) separated by byte 0x1F and ended by 0x1E; the rows'
/// encodings sorted, so that the same rows in another order give the same hash.
pub fn rows_sha256<'a>(rows: impl Iterator<Item = &'a Vec<RawCell>>) -> (String, u64) {
    let mut encoded: Vec<Vec<u8>> = rows
        .map(|r| {
            let mut e = Vec::new();
            for (k, c) in r.iter().enumerate() {
                if k > 0 {
                    e.push(0x1F);
                }
                match c {
                    RawCell::Null => e.push(0),
                    other => {
                        e.push(1);
                        e.extend_from_slice(other.text().as_bytes());
                    }
                }
            }
            e.push(0x1E);
            e
        })
        .collect();
    encoded.sort_unstable();
    let mut h = Sha256::new();
    let mut bytes = 0u64;
    for e in &encoded {
        h.update(e);
        bytes += e.len() as u64;
    }
    (data::hex(&h.finalize()), bytes)
}

/// Reads the query's rows as the two lots, exactly as a file holding both lots with a lot
/// column is read: numeric columns are characteristics, NULL is a missing cell.
///
/// # Errors
/// The database's refusal, no rows, a lot column not in the result, a result with one lot.
pub fn load_lots(
    source: &QuerySource,
    password: Option<&str>,
    options: &LoadOptions,
) -> Result<[Lot; 2], SourceError> {
    load_lots_counted(source, password, options).map(|(lots, _)| lots)
}

/// [`load_lots`], with the bytes of the query's result ([`ResultTable::wire_bytes`]).
///
/// # Errors
/// As [`load_lots`].
pub fn load_lots_counted(
    source: &QuerySource,
    password: Option<&str>,
    options: &LoadOptions,
) -> Result<([Lot; 2], u64), SourceError> {
    let mut session = source.database.connect(password)?;
    let table = session.query(&source.query)?;
    let bytes = table.wire_bytes();
    Ok((lots_from_table(source, &table, options)?, bytes))
}

/// The two lots of an already-read result.
///
/// # Errors
/// As [`load_lots`].
pub fn lots_from_table(
    source: &QuerySource,
    table: &ResultTable,
    options: &LoadOptions,
) -> Result<[Lot; 2], SourceError> {
    let url = source.database.url();
    let name = format!("query result ({url})");
    let provenance = Provenance {
        file_name: url.to_string(),
        rows_read: table.rows.len(),
        forced_labels: options.labels.clone(),
        query: Some(source.query.clone()),
        ..Provenance::of_rows(&name, source.database.kind())
    };
    let mut opts = options.clone();
    if !opts
        .labels
        .iter()
        .any(|l| data::match_key(l) == data::match_key(&source.lot_column))
    {
        opts.labels.push(source.lot_column.clone());
    }
    let mut all = data::from_cells(
        &name,
        &table.columns,
        &table.rows,
        "result row",
        &opts,
        provenance,
    )?;
    all.provenance.forced_labels = options.labels.clone();
    let wanted = source
        .lot_values
        .as_ref()
        .map(|v| [v[0].as_str(), v[1].as_str()]);
    let mut lots = data::split_lot(&all, &source.lot_column, wanted)?;
    let key = all
        .column(&source.lot_column)
        .map(|c| c.position)
        .unwrap_or(0);
    for lot in &mut lots {
        let value = lot
            .provenance
            .split
            .as_ref()
            .map(|(_, v)| v.clone())
            .unwrap_or_default();
        let (hash, bytes) = rows_sha256(
            table
                .rows
                .iter()
                .filter(|r| r.get(key).map(RawCell::text).as_deref() == Some(value.as_str())),
        );
        lot.provenance.sha256 = hash;
        lot.provenance.size_bytes = bytes;
        lot.provenance.path = url.to_string();
    }
    Ok(lots)
}
