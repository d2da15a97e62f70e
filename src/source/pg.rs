//! PostgreSQL over its own protocol: every statement in a `READ ONLY` transaction that is
//! rolled back; the user's query is described first, then read with every column cast to
//! text (PostgreSQL writes numbers in their shortest exact form), so values become cells
//! exactly as a file's text does.

use std::str::FromStr as _;
use std::time::Duration;

use postgres::error::SqlState;
use postgres::types::Type;
use postgres::{Client, Config, NoTls};

use super::statements::quote_ident;
use super::{Engine, ResultTable, SourceError, one_line};
use crate::data::RawCell;

pub(crate) struct Postgres {
    client: Client,
    url: String,
}

impl Postgres {
    pub(crate) fn connect(url: &str, password: Option<&str>) -> Result<Postgres, SourceError> {
        let mut config = Config::from_str(url).map_err(|e| {
            SourceError::Url(format!(
                "{url}: not a PostgreSQL URL lotshift can use: {}",
                one_line(&e.to_string())
            ))
        })?;
        config.connect_timeout(Duration::from_secs(10));
        if config.get_application_name().is_none() {
            config.application_name("lotshift");
        }
        if let Some(pw) = password {
            config.password(pw);
        }
        let client = config.connect(NoTls).map_err(|e| {
            let why = describe(&e);
            let refused = e.code().is_some_and(|c| {
                *c == SqlState::INVALID_PASSWORD
                    || *c == SqlState::INVALID_AUTHORIZATION_SPECIFICATION
            }) || why.contains("password");
            if refused {
                SourceError::Login {
                    url: url.to_string(),
                    why,
                }
            } else {
                SourceError::Connect {
                    url: url.to_string(),
                    why,
                }
            }
        })?;
        Ok(Postgres {
            client,
            url: url.to_string(),
        })
    }

    fn failed(&self, e: &postgres::Error) -> SourceError {
        if e.code() == Some(&SqlState::READ_ONLY_SQL_TRANSACTION) {
            return SourceError::Writes {
                url: self.url.clone(),
            };
        }
        SourceError::Query {
            url: self.url.clone(),
            why: describe(e),
        }
    }

    /// Runs `work` in a read-only transaction, rolled back afterwards.
    fn read_only<T>(
        &mut self,
        work: impl FnOnce(&mut postgres::Transaction<'_>) -> Result<T, postgres::Error>,
    ) -> Result<T, SourceError> {
        let mut tx = self
            .client
            .build_transaction()
            .read_only(true)
            .start()
            .map_err(|e| SourceError::Query {
                url: self.url.clone(),
                why: describe(&e),
            })?;
        let result = work(&mut tx);
        let _ = tx.rollback();
        result.map_err(|e| self.failed(&e))
    }

    /// Runs `sql` with text parameters, read-only.
    fn read(
        &mut self,
        sql: &str,
        params: &[&str],
    ) -> Result<(Vec<String>, Vec<postgres::Row>), SourceError> {
        self.read_only(|tx| {
            let stmt = tx.prepare(sql)?;
            let args: Vec<&(dyn postgres::types::ToSql + Sync)> = params
                .iter()
                .map(|p| p as &(dyn postgres::types::ToSql + Sync))
                .collect();
            let rows = tx.query(&stmt, &args)?;
            Ok((column_names(&stmt), rows))
        })
    }

    /// The user's statement as PostgreSQL describes it, without running it.
    fn describe_columns(&mut self, sql: &str) -> Result<Vec<String>, SourceError> {
        self.read_only(|tx| tx.prepare(sql).map(|stmt| column_names(&stmt)))
    }
}

fn column_names(stmt: &postgres::Statement) -> Vec<String> {
    stmt.columns()
        .iter()
        .map(|c| c.name().to_string())
        .collect()
}

/// A driver error in one line: the server's own message where there is one.
fn describe(e: &postgres::Error) -> String {
    match e.as_db_error() {
        Some(db) => one_line(db.message()),
        None => {
            let mut s = one_line(&e.to_string());
            let mut source = std::error::Error::source(e);
            while let Some(inner) = source {
                let t = one_line(&inner.to_string());
                if !s.contains(&t) {
                    s.push_str(": ");
                    s.push_str(&t);
                }
                source = inner.source();
            }
            s
        }
    }
}

fn cells(rows: &[postgres::Row]) -> Vec<Vec<RawCell>> {
    rows.iter()
        .map(|row| {
            (0..row.len())
                .map(|k| {
                    let ty = row.columns()[k].type_();
                    if *ty == Type::FLOAT8 {
                        row.get::<_, Option<f64>>(k)
                            .map_or(RawCell::Null, RawCell::Number)
                    } else if *ty == Type::FLOAT4 {
                        row.get::<_, Option<f32>>(k)
                            .map_or(RawCell::Null, |v| RawCell::Number(f64::from(v)))
                    } else if *ty == Type::INT8 {
                        row.get::<_, Option<i64>>(k)
                            .map_or(RawCell::Null, |v| RawCell::Number(v as f64))
                    } else if *ty == Type::INT4 {
                        row.get::<_, Option<i32>>(k)
                            .map_or(RawCell::Null, |v| RawCell::Number(f64::from(v)))
                    } else {
                        row.try_get::<_, Option<String>>(k)
                            .ok()
                            .flatten()
                            .map_or(RawCell::Null, RawCell::Text)
                    }
                })
                .collect()
        })
        .collect()
}

impl Engine for Postgres {
    fn user_query(&mut self, sql: &str) -> Result<ResultTable, SourceError> {
        let names = self.describe_columns(sql)?;
        if names.is_empty() {
            // A statement without result columns cannot be a lot table; run it in the
            // read-only transaction so that a write is refused in PostgreSQL's own terms.
            self.read(sql, &[])?;
            return Err(SourceError::Query {
                url: self.url.clone(),
                why: "the statement returns no columns; give a SELECT".into(),
            });
        }
        // Read as a subquery, a result with two columns of one name would be ambiguous.
        for (k, n) in names.iter().enumerate() {
            if names[..k].contains(n) {
                return Err(SourceError::Query {
                    url: self.url.clone(),
                    why: format!(
                        "the result has two columns named \"{n}\"; name them apart with AS"
                    ),
                });
            }
        }
        let body = sql.trim().trim_end_matches(';');
        let casts: Vec<String> = names
            .iter()
            .map(|n| format!("CAST(q.{} AS TEXT)", quote_ident(n)))
            .collect();
        let wrapped = format!("SELECT {} FROM ({body}\n) AS q", casts.join(", "));
        match self.read(&wrapped, &[]) {
            Ok((_, rows)) => Ok(ResultTable {
                columns: names,
                rows: cells(&rows),
            }),
            // Not a plain SELECT (a write with RETURNING, say): run it as given, still
            // read-only, for PostgreSQL's own reason.
            Err(SourceError::Query { .. }) => {
                self.read(sql, &[])?;
                Err(SourceError::Query {
                    url: self.url.clone(),
                    why: "lotshift reads a query as a subquery; give one SELECT statement".into(),
                })
            }
            Err(e) => Err(e),
        }
    }

    fn statement(&mut self, sql: &str, params: &[&str]) -> Result<ResultTable, SourceError> {
        let (columns, rows) = self.read(sql, params)?;
        Ok(ResultTable {
            columns,
            rows: cells(&rows),
        })
    }
}
