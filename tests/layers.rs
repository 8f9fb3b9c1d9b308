//! The layers of the library import only downward (DEVELOPERS.md, "Layers"): a module may use
//! the ones below it, never one above, so the code reads in the order the data flows and no two
//! layers depend on each other in a circle. Test modules are exempt (a test may build its input
//! with anything).

use std::path::Path;

/// Bottom to top. A module may import its own layer and any below it.
const LAYERS: &[&[&str]] = &[
    &["messages", "units", "testkit"],
    &["kernels"],
    &["source"],
    &["dsp"],
    &["plan"],
    &["measure"],
    &["pipeline"],
    &["output", "tui"],
    &["cli"],
    &["cmd"],
    &["app"],
];

fn layer_of(module: &str) -> Option<usize> {
    LAYERS.iter().position(|l| l.contains(&module))
}

/// The code of a file before its test module.
fn code_of(text: &str) -> &str {
    text.find("#[cfg(test)]").map_or(text, |i| &text[..i])
}

fn visit(dir: &Path, files: &mut Vec<std::path::PathBuf>) {
    for entry in std::fs::read_dir(dir).unwrap() {
        let path = entry.unwrap().path();
        if path.is_dir() {
            visit(&path, files);
        } else if path.extension().is_some_and(|e| e == "rs") {
            files.push(path);
        }
    }
}

#[test]
fn modules_import_only_downward() {
    let src = Path::new(env!("CARGO_MANIFEST_DIR")).join("src");
    let mut files = Vec::new();
    visit(&src, &mut files);
    let mut wrong = Vec::new();
    let mut seen = 0;
    for file in &files {
        let rel = file.strip_prefix(&src).unwrap();
        let top = rel.iter().next().unwrap().to_str().unwrap().trim_end_matches(".rs");
        if matches!(top, "lib" | "main") {
            continue;
        }
        let own = layer_of(top).unwrap_or_else(|| panic!("{top} is in no layer; add it"));
        seen += 1;
        let text = std::fs::read_to_string(file).unwrap();
        for (at, _) in code_of(&text).match_indices("crate::") {
            let name: String = text[at + 7..]
                .chars()
                .take_while(|c| c.is_ascii_alphanumeric() || *c == '_')
                .collect();
            if let Some(layer) = layer_of(&name) {
                if layer > own {
                    wrong.push(format!("{} imports crate::{name}", rel.display()));
                }
            }
        }
        // Nothing below the command line knows clap or its raw flag types.
        if !matches!(top, "cli" | "app") {
            let code = code_of(&text);
            assert!(!code.contains("clap"), "{} uses clap", rel.display());
            assert!(!code.contains("Args"), "{} uses a raw flag type", rel.display());
        }
    }
    assert!(seen > 50, "only {seen} files read");
    assert!(wrong.is_empty(), "upward imports:\n{}", wrong.join("\n"));
}
