//! The SQLite back end: one file, compiled in (`rusqlite`'s bundled SQLite: no system library,
//! and the same SQLite version wherever bandwarden runs). WAL mode, so `report` may read while
//! `collect` writes, and `synchronous = NORMAL`: in WAL mode a commit is then durable against a
//! crash of bandwarden and loses at most the last transactions on a power cut, never corrupts
//! (SQLite documentation, "PRAGMA synchronous").

use super::{Backend, Dialect, Val};
use anyhow::{Context, Result};
use rusqlite::types::{ToSqlOutput, ValueRef};
use rusqlite::{params_from_iter, Connection, ToSql};
use std::path::Path;

pub struct Sqlite {
    conn: Connection,
}

impl ToSql for Val {
    fn to_sql(&self) -> rusqlite::Result<ToSqlOutput<'_>> {
        Ok(match self {
            Val::Null => ToSqlOutput::Borrowed(ValueRef::Null),
            Val::Int(i) => ToSqlOutput::Borrowed(ValueRef::Integer(*i)),
            Val::Real(r) => ToSqlOutput::Borrowed(ValueRef::Real(*r)),
            Val::Text(s) => ToSqlOutput::Borrowed(ValueRef::Text(s.as_bytes())),
        })
    }
}

fn val(v: ValueRef<'_>) -> Val {
    match v {
        ValueRef::Null => Val::Null,
        ValueRef::Integer(i) => Val::Int(i),
        ValueRef::Real(r) => Val::Real(r),
        ValueRef::Text(t) | ValueRef::Blob(t) => Val::Text(String::from_utf8_lossy(t).into_owned()),
    }
}

impl Sqlite {
    pub fn open(path: &Path) -> Result<Sqlite> {
        let conn = Connection::open(path).with_context(|| {
            format!("cannot open the SQLite database '{}'; check the path", path.display())
        })?;
        conn.busy_timeout(std::time::Duration::from_secs(10))?;
        conn.pragma_update(None, "journal_mode", "WAL")
            .with_context(|| format!("'{}' is not a SQLite database", path.display()))?;
        conn.pragma_update(None, "synchronous", "NORMAL")?;
        conn.set_prepared_statement_cache_capacity(64);
        Ok(Sqlite { conn })
    }
}

impl Backend for Sqlite {
    fn dialect(&self) -> Dialect {
        Dialect::Sqlite
    }

    fn batch(&mut self, sql: &str) -> Result<()> {
        self.conn.execute_batch(sql).with_context(|| format!("SQLite: {}", first_line(sql)))
    }

    fn exec(&mut self, sql: &str, params: &[Val]) -> Result<u64> {
        let mut st = self.conn.prepare_cached(sql)?;
        Ok(st.execute(params_from_iter(params))? as u64)
    }

    fn each(
        &mut self,
        sql: &str,
        params: &[Val],
        each: &mut dyn FnMut(&[Val]) -> Result<()>,
    ) -> Result<()> {
        let mut st = self.conn.prepare_cached(sql)?;
        let n = st.column_count();
        let mut rows = st.query(params_from_iter(params))?;
        let mut row = Vec::with_capacity(n);
        while let Some(r) = rows.next()? {
            row.clear();
            for i in 0..n {
                row.push(val(r.get_ref(i)?));
            }
            each(&row)?;
        }
        Ok(())
    }
}

pub(super) fn first_line(sql: &str) -> &str {
    sql.trim().lines().next().unwrap_or("")
}
