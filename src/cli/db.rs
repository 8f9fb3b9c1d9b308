//! The database flags shared by `collect`, `import` and `report` (`--db`, and the password
//! file), and `import`'s own.

use crate::net::mqtt::read_secret;
use crate::store::{DbUrl, PASSWORD_ENV};
use anyhow::{bail, Result};
use clap::Args;
use std::path::PathBuf;

/// `--db` and its password.
#[derive(Args, Debug, Default)]
pub struct DbArgs {
    /// The database: sqlite:PATH (a file, created if missing) or
    /// postgres://USER@HOST:PORT/DBNAME (the password from --db-password-file or
    /// BANDWARDEN_DB_PASSWORD, never in the URL).
    #[arg(long, value_name = "URL")]
    pub db: Option<String>,
    /// File whose first line is the database password (else BANDWARDEN_DB_PASSWORD is read).
    #[arg(long, value_name = "FILE", requires = "db")]
    pub db_password_file: Option<PathBuf>,
}

impl DbArgs {
    /// The database named, if any.
    pub fn validate(self) -> Result<Option<DbUrl>> {
        let Some(url) = self.db else { return Ok(None) };
        let password = read_secret(self.db_password_file.as_deref(), PASSWORD_ENV)?;
        Ok(Some(DbUrl::parse(&url, password)?))
    }
}

/// `bandwarden import` flags.
#[derive(Args, Debug)]
pub struct ImportArgs {
    /// Occupancy logs written by `bandwarden log` or `collect --out` (JSON Lines or --csv);
    /// `-` reads standard input.
    #[arg(value_name = "LOG", required = true)]
    pub logs: Vec<String>,
    #[command(flatten)]
    pub db: DbArgs,
}

/// A validated `import`.
#[derive(Clone, Debug)]
pub struct ImportConfig {
    pub logs: Vec<String>,
    pub db: DbUrl,
}

impl ImportArgs {
    pub fn validate(self) -> Result<ImportConfig> {
        let Some(db) = self.db.validate()? else {
            bail!("import needs --db sqlite:PATH or --db postgres://USER@HOST:PORT/DBNAME");
        };
        Ok(ImportConfig { logs: self.logs, db })
    }
}
