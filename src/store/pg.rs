//! The PostgreSQL back end, with the `postgres` crate: a synchronous client (on `tokio-postgres`
//! inside), which fits bandwarden's design of plain threads; an async driver would bring a
//! runtime into a program that has none. Statements are prepared once and kept.
//!
//! A batch's rows go in by `COPY` (text format) into a temporary table shaped like the target,
//! then one `INSERT … SELECT … ON CONFLICT DO NOTHING`: a few round trips a table and batch
//! instead of one a row, which is what one-row `INSERT`s cost over a connection.

use super::{Backend, Dialect, Rows, Val};
use anyhow::{Context, Result};
use postgres::types::{to_sql_checked, IsNull, ToSql, Type};
use postgres::{Client, NoTls, Statement};
use std::collections::HashMap;
use std::fmt::Write as _;
use std::io::Write as _;

pub struct Pg {
    client: Client,
    prepared: HashMap<String, Statement>,
}

impl ToSql for Val {
    fn to_sql(
        &self,
        ty: &Type,
        out: &mut postgres::types::private::BytesMut,
    ) -> Result<IsNull, Box<dyn std::error::Error + Sync + Send>> {
        match (self, ty) {
            (Val::Null, _) => Ok(IsNull::Yes),
            (Val::Int(i), &Type::INT4) => (*i as i32).to_sql(ty, out),
            (Val::Int(i), &Type::FLOAT8) => (*i as f64).to_sql(ty, out),
            (Val::Int(i), _) => i.to_sql(ty, out),
            (Val::Real(r), &Type::INT8) => (*r as i64).to_sql(ty, out),
            (Val::Real(r), _) => r.to_sql(ty, out),
            (Val::Text(s), _) => s.as_str().to_sql(ty, out),
        }
    }

    fn accepts(_: &Type) -> bool {
        true
    }

    to_sql_checked!();
}

fn val(row: &postgres::Row, i: usize) -> Result<Val> {
    let ty = row.columns()[i].type_();
    Ok(if *ty == Type::INT8 {
        row.try_get::<_, Option<i64>>(i)?.map_or(Val::Null, Val::Int)
    } else if *ty == Type::INT4 {
        row.try_get::<_, Option<i32>>(i)?.map_or(Val::Null, |v| Val::Int(v.into()))
    } else if *ty == Type::FLOAT8 {
        row.try_get::<_, Option<f64>>(i)?.map_or(Val::Null, Val::Real)
    } else if *ty == Type::BOOL {
        row.try_get::<_, Option<bool>>(i)?.map_or(Val::Null, |b| Val::Int(b.into()))
    } else {
        row.try_get::<_, Option<String>>(i)?.map_or(Val::Null, Val::Text)
    })
}

impl Pg {
    pub fn open(url: &str, password: Option<&str>) -> Result<Pg> {
        let mut config: postgres::Config = url.parse().with_context(|| {
            format!("--db '{}' is not a PostgreSQL URL", crate::messages::sanitize(url))
        })?;
        if let Some(p) = password {
            config.password(p);
        }
        config.connect_timeout(std::time::Duration::from_secs(10));
        let client = config.connect(NoTls).with_context(|| {
            format!("cannot connect to the PostgreSQL database {}", crate::messages::sanitize(url))
        })?;
        Ok(Pg { client, prepared: HashMap::new() })
    }

    fn statement(&mut self, sql: &str) -> Result<Statement> {
        if let Some(s) = self.prepared.get(sql) {
            return Ok(s.clone());
        }
        let st = self
            .client
            .prepare(&sql.replace('?', "$"))
            .with_context(|| format!("PostgreSQL: {}", super::sqlite::first_line(sql)))?;
        self.prepared.insert(sql.to_string(), st.clone());
        Ok(st)
    }
}

/// A value in `COPY`'s text format (PostgreSQL documentation, "COPY", File Formats: Text
/// Format): `\N` for NULL, backslash, newline, carriage return and tab escaped.
fn copy_text(out: &mut String, v: &Val) {
    match v {
        Val::Null => out.push_str("\\N"),
        Val::Int(i) => write!(out, "{i}").expect("a String takes it"),
        // Rust writes the shortest digits that read back as the same double; PostgreSQL reads
        // them exactly (float8 input is correctly rounded).
        Val::Real(r) if r.is_finite() => write!(out, "{r}").expect("a String takes it"),
        Val::Real(r) if r.is_nan() => out.push_str("NaN"),
        Val::Real(r) => out.push_str(if *r > 0.0 { "Infinity" } else { "-Infinity" }),
        Val::Text(t) => {
            for c in t.chars() {
                match c {
                    '\\' => out.push_str("\\\\"),
                    '\n' => out.push_str("\\n"),
                    '\r' => out.push_str("\\r"),
                    '\t' => out.push_str("\\t"),
                    c => out.push(c),
                }
            }
        }
    }
}

/// `rows` in `COPY`'s text format: a line a row, values between tabs.
fn copy_lines(rows: &Rows) -> String {
    let mut out = String::with_capacity(rows.values.len() * 16);
    for row in rows.values.chunks(rows.width()) {
        for (i, v) in row.iter().enumerate() {
            if i > 0 {
                out.push('\t');
            }
            copy_text(&mut out, v);
        }
        out.push('\n');
    }
    out
}

fn refs(params: &[Val]) -> Vec<&(dyn ToSql + Sync)> {
    params.iter().map(|p| p as &(dyn ToSql + Sync)).collect()
}

impl Backend for Pg {
    fn dialect(&self) -> Dialect {
        Dialect::Postgres
    }

    fn batch(&mut self, sql: &str) -> Result<()> {
        self.client
            .batch_execute(sql)
            .with_context(|| format!("PostgreSQL: {}", super::sqlite::first_line(sql)))
    }

    fn exec(&mut self, sql: &str, params: &[Val]) -> Result<u64> {
        let st = self.statement(sql)?;
        Ok(self.client.execute(&st, &refs(params))?)
    }

    fn insert(&mut self, rows: &Rows) -> Result<u64> {
        let (table, cols) = (rows.table, rows.columns);
        let what = || format!("PostgreSQL: storing the {table}");
        self.client
            .batch_execute(&format!(
                "CREATE TEMP TABLE IF NOT EXISTS load_{table} (LIKE {table}); TRUNCATE load_{table}"
            ))
            .with_context(what)?;
        let mut copy = self
            .client
            .copy_in(&format!("COPY load_{table} ({cols}) FROM STDIN"))
            .with_context(what)?;
        copy.write_all(copy_lines(rows).as_bytes()).with_context(what)?;
        copy.finish().with_context(what)?;
        let n = self
            .client
            .execute(
                &format!(
                    "INSERT INTO {table} ({cols}) SELECT {cols} FROM load_{table} \
                     ON CONFLICT DO NOTHING"
                ),
                &[],
            )
            .with_context(what)?;
        Ok(n)
    }

    fn each(
        &mut self,
        sql: &str,
        params: &[Val],
        each: &mut dyn FnMut(&[Val]) -> Result<()>,
    ) -> Result<()> {
        let st = self.statement(sql)?;
        let mut row = Vec::new();
        for r in self.client.query(&st, &refs(params))? {
            row.clear();
            for i in 0..r.len() {
                row.push(val(&r, i)?);
            }
            each(&row)?;
        }
        Ok(())
    }
}
