//! Writes the occupancy logs of a made-up network of Wrenhollow Ridge sites, one JSON Lines
//! file per site, for scripts/bench-report:
//! `cargo run --release --example network_logs -- DIR SITES CHANNELS MINUTES`; DIR `-` writes
//! every site's log, one after another, on standard output (to pipe into `import --db URL -`).

#[path = "../tests/support/network_logs.rs"]
mod network_logs;

use std::io::{BufWriter, Write};

fn main() {
    let args: Vec<String> = std::env::args().skip(1).collect();
    let [dir, sites, channels, minutes] = &args[..] else {
        eprintln!("usage: network_logs DIR SITES CHANNELS MINUTES");
        std::process::exit(2);
    };
    let (sites, channels, minutes): (usize, usize, u64) =
        (sites.parse().unwrap(), channels.parse().unwrap(), minutes.parse().unwrap());
    let stdout = dir == "-";
    if !stdout {
        std::fs::create_dir_all(dir).unwrap();
    }
    let mut total = 0;
    for s in 0..sites {
        let site = format!("ridge-{s:02}");
        let mut out: BufWriter<Box<dyn Write>> = BufWriter::new(if stdout {
            Box::new(std::io::stdout().lock())
        } else {
            let path = std::path::Path::new(dir).join(format!("{site}.jsonl"));
            Box::new(std::fs::File::create(&path).unwrap())
        });
        let spec = network_logs::RunSpec {
            site,
            run: format!("20261101T000000Z-{}", 1000 + s),
            channels,
            start_epoch: 1_793_491_200, // 2026-11-01T00:00:00Z
            minutes,
            seed: s as u64 + 1,
            no_clock: false,
        };
        total += network_logs::write_run(&mut out, &spec).unwrap();
    }
    eprintln!("{total} records");
}
