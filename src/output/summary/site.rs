//! Which site a log belongs to, and `--site` (choose sites, or merge several under one name).
//!
//! A run names its site in its `start` record (`log --site`). A run that does not is named after
//! its file, less the extension and any date or time stamp a rotation or a daily shell loop put in
//! the name: `north.2026-12-02.jsonl`, `north-2026-12-03.jsonl`, `north_20261203.csv` and
//! `north.2026-12-02T06-48-59.001.jsonl` are all `north`, so the nights of one site are one site.

use anyhow::{bail, Result};

/// A file's site when its runs do not name one.
pub fn site_of_file(path: &str) -> String {
    let name = std::path::Path::new(path)
        .file_name()
        .map(|n| n.to_string_lossy().into_owned())
        .unwrap_or_else(|| path.to_string());
    let stem = match name.rsplit_once('.') {
        Some((stem, ext)) if !stem.is_empty() && ext.chars().all(|c| c.is_ascii_alphabetic()) => {
            stem.to_string()
        }
        _ => name.clone(),
    };
    let cut = stem
        .char_indices()
        .find(|&(i, c)| i > 0 && matches!(c, '.' | '-' | '_') && is_stamp(&stem[i + 1..]))
        .map_or(stem.len(), |(i, _)| i);
    crate::messages::sanitize(&stem[..cut])
}

/// A date, optionally with a time and a sequence number: `2026-12-03`, `20261203`,
/// `2026-12-02T06`, `2026-12-02T06-48-59.001`.
fn is_stamp(s: &str) -> bool {
    let b = s.as_bytes();
    let digits =
        |r: std::ops::Range<usize>| b.get(r).is_some_and(|d| d.iter().all(u8::is_ascii_digit));
    let date_len = if digits(0..4)
        && b.get(4) == Some(&b'-')
        && digits(5..7)
        && b.get(7) == Some(&b'-')
        && digits(8..10)
    {
        10
    } else if digits(0..8) {
        8
    } else {
        return false;
    };
    s[date_len..]
        .chars()
        .all(|c| c.is_ascii_digit() || matches!(c, 'T' | 'Z' | '-' | '_' | ':' | '.'))
}

/// `--site`: which sites the report shows, and which it merges.
#[derive(Clone, Debug, Default, PartialEq)]
pub struct SiteRules(Vec<SiteRule>);

/// One `--site`: `NAME` (that site) or `NAME=A,B` (sites A and B as one site NAME).
#[derive(Clone, Debug, PartialEq)]
pub struct SiteRule {
    pub name: String,
    pub members: Vec<String>,
}

impl SiteRules {
    /// Parses every `--site` given.
    pub fn parse(values: &[String]) -> Result<SiteRules> {
        let mut rules = Vec::new();
        for v in values {
            let (name, members) = match v.split_once('=') {
                Some((n, m)) => (n.trim(), m.split(',').map(|s| s.trim().to_string()).collect()),
                None => (v.trim(), vec![v.trim().to_string()]),
            };
            if name.is_empty() || members.iter().any(String::is_empty) {
                bail!(
                    "--site '{}': give a site's name, or NAME=SITE,SITE to merge sites under one name",
                    crate::messages::sanitize(v)
                );
            }
            rules.push(SiteRule { name: name.to_string(), members });
        }
        Ok(SiteRules(rules))
    }

    /// The site a run of `site` counts under, or `None` when `--site` leaves it out.
    pub fn map(&self, site: &str) -> Option<String> {
        if self.0.is_empty() {
            return Some(site.to_string());
        }
        self.0.iter().find(|r| r.members.iter().any(|m| m == site)).map(|r| r.name.clone())
    }

    /// Sites `--site` asked for that no log holds.
    pub fn missing(&self, seen: &[String]) -> Vec<String> {
        self.0.iter().flat_map(|r| &r.members).filter(|m| !seen.contains(m)).cloned().collect()
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn stamps_and_rotation_keys_leave_the_site() {
        for (file, site) in [
            ("/var/log/north.2026-12-02.jsonl", "north"),
            ("north.2026-12-02T06-48-59.001.jsonl", "north"),
            ("north.2026-12-02T06.jsonl", "north"),
            ("site-2026-12-03.jsonl", "site"),
            ("ridge_20261203.csv", "ridge"),
            ("ridge.jsonl", "ridge"),
            ("ridge", "ridge"),
            ("north-2.jsonl", "north-2"),
            ("2026-12-03.jsonl", "2026-12-03"),
            ("mast-7-2026-12-03.jsonl", "mast-7"),
        ] {
            assert_eq!(site_of_file(file), site, "{file}");
        }
    }

    #[test]
    fn site_rules_select_and_merge() {
        let none = SiteRules::default();
        assert_eq!(none.map("x").as_deref(), Some("x"));
        let r = SiteRules::parse(&["north".into(), "ridge=mast,hut".into()]).unwrap();
        assert_eq!(r.map("north").as_deref(), Some("north"));
        assert_eq!(r.map("hut").as_deref(), Some("ridge"));
        assert_eq!(r.map("south"), None);
        assert_eq!(r.missing(&["north".into(), "mast".into()]), ["hut"]);
        assert!(SiteRules::parse(&["=a".into()]).is_err());
        assert!(SiteRules::parse(&["a=b,".into()]).is_err());
    }
}
