//! SQLite, built into the program: a read-only connection, and every statement checked not
//! to write before it runs.

use std::path::Path;

use rusqlite::types::ValueRef;
use rusqlite::{Connection, OpenFlags};

use super::{Engine, ResultTable, SourceError, one_line};
use crate::data::RawCell;

pub(crate) struct Sqlite {
    conn: Connection,
    url: String,
}

impl Sqlite {
    pub(crate) fn open(path: &Path, url: &str) -> Result<Sqlite, SourceError> {
        if !path.is_file() {
            return Err(SourceError::Connect {
                url: url.to_string(),
                why: format!("no database file at {}", path.display()),
            });
        }
        let conn = Connection::open_with_flags(
            path,
            OpenFlags::SQLITE_OPEN_READ_ONLY | OpenFlags::SQLITE_OPEN_NO_MUTEX,
        )
        .map_err(|e| SourceError::Connect {
            url: url.to_string(),
            why: one_line(&e.to_string()),
        })?;
        conn.pragma_update(None, "query_only", true)
            .map_err(|e| SourceError::Connect {
                url: url.to_string(),
                why: one_line(&e.to_string()),
            })?;
        Ok(Sqlite {
            conn,
            url: url.to_string(),
        })
    }

    fn run(&mut self, sql: &str, params: &[&str]) -> Result<ResultTable, SourceError> {
        let url = self.url.clone();
        let failed = |e: rusqlite::Error| match e {
            rusqlite::Error::MultipleStatement => SourceError::Query {
                url: url.clone(),
                why: "the query holds more than one statement; give one SELECT".into(),
            },
            rusqlite::Error::SqliteFailure(f, _) if f.code == rusqlite::ErrorCode::ReadOnly => {
                SourceError::Writes { url: url.clone() }
            }
            other => SourceError::Query {
                url: url.clone(),
                why: one_line(&other.to_string()),
            },
        };
        let mut stmt = self.conn.prepare(sql).map_err(failed)?;
        if !stmt.readonly() {
            return Err(SourceError::Writes { url });
        }
        let columns: Vec<String> = stmt.column_names().map(|s| s.to_string()).collect();
        if columns.is_empty() {
            return Err(SourceError::Query {
                url,
                why: "the statement returns no columns; give a SELECT".into(),
            });
        }
        let p = columns.len();
        let mut rows = stmt
            .query(rusqlite::params_from_iter(params.iter()))
            .map_err(failed)?;
        let mut out = Vec::new();
        while let Some(row) = rows.next().map_err(failed)? {
            let mut cells = Vec::with_capacity(p);
            for k in 0..p {
                let v = row.get_ref(k).map_err(failed)?;
                cells.push(match v {
                    ValueRef::Null => RawCell::Null,
                    ValueRef::Integer(i) => RawCell::Number(i as f64),
                    ValueRef::Real(x) => RawCell::Number(x),
                    ValueRef::Text(t) => RawCell::Text(String::from_utf8_lossy(t).into_owned()),
                    ValueRef::Blob(_) => RawCell::Text("(binary)".into()),
                });
            }
            out.push(cells);
        }
        Ok(ResultTable { columns, rows: out })
    }
}

impl Engine for Sqlite {
    fn user_query(&mut self, sql: &str) -> Result<ResultTable, SourceError> {
        self.run(sql, &[])
    }

    fn statement(&mut self, sql: &str, params: &[&str]) -> Result<ResultTable, SourceError> {
        self.run(sql, params)
    }
}
