//! Shell completions and the manual page, generated from the same clap definitions as the
//! parser, so they never disagree with it.

use super::Cli;
use clap::{Args, CommandFactory, ValueEnum};
use std::io::{self, Write};

/// Shells we write completions for.
#[derive(Clone, Copy, Debug, PartialEq, Eq, ValueEnum)]
pub enum Shell {
    Bash,
    Zsh,
    Fish,
}

#[derive(Args, Debug)]
pub struct CompletionsArgs {
    /// The shell: bash, zsh or fish.
    #[arg(value_name = "SHELL")]
    pub shell: Shell,
}

/// Writes the completion script for `shell` to `out`.
pub fn write_completions(shell: Shell, out: &mut dyn Write) -> io::Result<()> {
    let mut cmd = Cli::command();
    let generator = match shell {
        Shell::Bash => clap_complete::Shell::Bash,
        Shell::Zsh => clap_complete::Shell::Zsh,
        Shell::Fish => clap_complete::Shell::Fish,
    };
    let mut buf = Vec::new();
    clap_complete::generate(generator, &mut cmd, "bandwarden", &mut buf);
    out.write_all(&buf)?;
    out.flush()
}

/// Writes the manual page (roff, section 1) to `out`: the program and every subcommand.
pub fn write_manual(out: &mut dyn Write) -> io::Result<()> {
    let cmd = Cli::command();
    let mut buf = Vec::new();
    clap_mangen::Man::new(cmd.clone()).render(&mut buf)?;
    for sub in cmd.get_subcommands().filter(|s| !s.is_hide_set()) {
        let name = format!("bandwarden-{}", sub.get_name());
        let sub = sub.clone().name(name.clone()).bin_name(name.replace('-', " "));
        buf.extend_from_slice(b"\n");
        clap_mangen::Man::new(sub).render(&mut buf)?;
    }
    out.write_all(&buf)?;
    out.flush()
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn completions_name_every_subcommand_and_flag() {
        for shell in [Shell::Bash, Shell::Zsh, Shell::Fish] {
            let mut out = Vec::new();
            write_completions(shell, &mut out).unwrap();
            let text = String::from_utf8(out).unwrap();
            for word in ["measure", "log", "watch", "demo", "threshold-db", "row-rate"] {
                assert!(text.contains(word), "{shell:?} completions lack {word}");
            }
        }
    }

    #[test]
    fn the_manual_documents_each_command() {
        let mut out = Vec::new();
        write_manual(&mut out).unwrap();
        let text = String::from_utf8(out).unwrap();
        assert!(text.starts_with(".ie") || text.contains(".TH"), "roff: {}", &text[..40]);
        for name in ["bandwarden\\-measure", "bandwarden\\-log", "bandwarden\\-watch"] {
            assert!(text.contains(name), "manual lacks {name}");
        }
        assert!(text.contains("ITU\\-R SM.1880"), "flag help reaches the manual");
    }
}
