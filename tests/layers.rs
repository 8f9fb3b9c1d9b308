//! The layers of the library import only downward: a module may use the ones below it, never
//! one above, so the code reads in the order the data flows and no two layers depend on each
//! other in a circle. The order is written once, in the doc of `src/lib.rs` (the list under
//! "Layers, lowest first"); this test reads it from there, so the docs and the check cannot
//! disagree.
//!
//! Every file is parsed (syn) and every path that starts with `crate::` is checked, in all code
//! that is compiled outside tests: items and modules marked `#[cfg(test)]` (and the files such a
//! module declares) are the only exemption, since a test may build its input with anything.
//! Doc comments are not code and are not checked.

use std::collections::BTreeSet;
use std::path::{Path, PathBuf};
use syn::visit::Visit;

fn src() -> PathBuf {
    Path::new(env!("CARGO_MANIFEST_DIR")).join("src")
}

/// The layers, lowest first, as `src/lib.rs` writes them: the doc lines between
/// `//! Layers, lowest first` and the next blank doc line, one layer per line, modules of one
/// layer joined by `,`, each line `//! N. a, b: what they hold`.
fn layers() -> Vec<Vec<String>> {
    let lib = std::fs::read_to_string(src().join("lib.rs")).unwrap();
    let mut out = Vec::new();
    let mut inside = false;
    for line in lib.lines() {
        let Some(doc) = line.strip_prefix("//!") else { continue };
        let doc = doc.trim();
        if doc.starts_with("Layers, lowest first") {
            inside = true;
            continue;
        }
        if inside {
            if doc.is_empty() {
                break;
            }
            let (_, rest) = doc.split_once(". ").expect("a layer line reads `N. modules: what`");
            let (mods, _) = rest.split_once(':').expect("a layer line reads `N. modules: what`");
            out.push(mods.split(',').map(|m| m.trim().trim_matches('`').to_string()).collect());
        }
    }
    assert!(out.len() > 8, "lib.rs lists only {} layers", out.len());
    out
}

fn layer_of(layers: &[Vec<String>], module: &str) -> Option<usize> {
    layers.iter().position(|l| l.iter().any(|m| m == module))
}

fn is_cfg_test(attrs: &[syn::Attribute]) -> bool {
    attrs.iter().any(|a| {
        a.path().is_ident("cfg") && a.parse_args::<syn::Ident>().is_ok_and(|i| i == "test")
    })
}

/// What one file's non-test code refers to: the modules named after `crate::`, whether clap or
/// a raw `*Args` type appears, and the files of test-only modules it declares.
#[derive(Default)]
struct Refs {
    crate_modules: BTreeSet<String>,
    flag_types: BTreeSet<String>,
    test_files: Vec<String>,
}

impl<'ast> Visit<'ast> for Refs {
    fn visit_item(&mut self, item: &'ast syn::Item) {
        let attrs = match item {
            syn::Item::Fn(i) => &i.attrs,
            syn::Item::Mod(i) => &i.attrs,
            syn::Item::Impl(i) => &i.attrs,
            syn::Item::Use(i) => &i.attrs,
            syn::Item::Struct(i) => &i.attrs,
            syn::Item::Enum(i) => &i.attrs,
            syn::Item::Const(i) => &i.attrs,
            syn::Item::Static(i) => &i.attrs,
            syn::Item::Trait(i) => &i.attrs,
            syn::Item::Type(i) => &i.attrs,
            syn::Item::Macro(i) => &i.attrs,
            _ => return syn::visit::visit_item(self, item),
        };
        if is_cfg_test(attrs) {
            if let syn::Item::Mod(m) = item {
                if m.content.is_none() {
                    self.test_files.push(m.ident.to_string());
                }
            }
            return;
        }
        syn::visit::visit_item(self, item);
    }

    fn visit_impl_item_fn(&mut self, f: &'ast syn::ImplItemFn) {
        if !is_cfg_test(&f.attrs) {
            syn::visit::visit_impl_item_fn(self, f);
        }
    }

    fn visit_path(&mut self, path: &'ast syn::Path) {
        if let (Some(first), Some(second)) = (path.segments.first(), path.segments.iter().nth(1)) {
            if first.ident == "crate" {
                self.crate_modules.insert(second.ident.to_string());
            }
        }
        for s in &path.segments {
            let name = s.ident.to_string();
            if name == "clap" || (name.ends_with("Args") && name.len() > 4) {
                self.flag_types.insert(name);
            }
        }
        syn::visit::visit_path(self, path);
    }

    fn visit_use_tree(&mut self, tree: &'ast syn::UseTree) {
        if let syn::UseTree::Path(p) = tree {
            if p.ident == "crate" {
                collect_use_heads(&p.tree, &mut self.crate_modules);
            }
        }
        walk_use_names(tree, &mut self.flag_types);
        syn::visit::visit_use_tree(self, tree);
    }

    fn visit_macro(&mut self, mac: &'ast syn::Macro) {
        // Paths inside macro calls (format!, assert!, vec!…) are tokens, not parsed paths.
        let text = mac.tokens.to_string();
        for (at, _) in text.match_indices("crate ::") {
            let name: String = text[at + 8..]
                .trim_start()
                .chars()
                .take_while(|c| c.is_ascii_alphanumeric() || *c == '_')
                .collect();
            self.crate_modules.insert(name);
        }
        syn::visit::visit_macro(self, mac);
    }
}

fn collect_use_heads(tree: &syn::UseTree, out: &mut BTreeSet<String>) {
    match tree {
        syn::UseTree::Path(p) => {
            out.insert(p.ident.to_string());
        }
        syn::UseTree::Name(n) => {
            out.insert(n.ident.to_string());
        }
        syn::UseTree::Rename(r) => {
            out.insert(r.ident.to_string());
        }
        syn::UseTree::Group(g) => g.items.iter().for_each(|t| collect_use_heads(t, out)),
        syn::UseTree::Glob(_) => {}
    }
}

fn walk_use_names(tree: &syn::UseTree, out: &mut BTreeSet<String>) {
    let name = match tree {
        syn::UseTree::Path(p) => p.ident.to_string(),
        syn::UseTree::Name(n) => n.ident.to_string(),
        syn::UseTree::Rename(r) => r.ident.to_string(),
        _ => String::new(),
    };
    if name == "clap" || (name.ends_with("Args") && name.len() > 4) {
        out.insert(name);
    }
}

fn visit(dir: &Path, files: &mut Vec<PathBuf>) {
    for entry in std::fs::read_dir(dir).unwrap() {
        let path = entry.unwrap().path();
        if path.is_dir() {
            visit(&path, files);
        } else if path.extension().is_some_and(|e| e == "rs") {
            files.push(path);
        }
    }
}

/// The file a `mod name;` declared in `file` lives in (`name.rs` or `name/mod.rs`, beside a
/// `mod.rs`/`lib.rs` or in the folder named after the declaring file).
fn module_file(file: &Path, name: &str) -> Vec<PathBuf> {
    let dir = file.parent().unwrap();
    let stem = file.file_stem().unwrap().to_str().unwrap();
    let base =
        if matches!(stem, "mod" | "lib" | "main") { dir.to_path_buf() } else { dir.join(stem) };
    vec![base.join(format!("{name}.rs")), base.join(name).join("mod.rs")]
}

#[test]
fn modules_import_only_downward() {
    let layers = layers();
    let src = src();
    let mut files = Vec::new();
    visit(&src, &mut files);
    let mut parsed = Vec::new();
    let mut test_only = BTreeSet::new();
    for file in &files {
        let text = std::fs::read_to_string(file).unwrap();
        let ast = syn::parse_file(&text)
            .unwrap_or_else(|e| panic!("{} does not parse: {e}", file.display()));
        let mut refs = Refs::default();
        refs.visit_file(&ast);
        for name in &refs.test_files {
            test_only.extend(module_file(file, name));
        }
        parsed.push((file.clone(), refs));
    }
    let mut wrong = Vec::new();
    let mut seen = 0;
    for (file, refs) in &parsed {
        if test_only.contains(file) {
            continue;
        }
        let rel = file.strip_prefix(&src).unwrap();
        let top = rel.iter().next().unwrap().to_str().unwrap().trim_end_matches(".rs");
        if matches!(top, "lib" | "main") {
            continue;
        }
        let own = layer_of(&layers, top).unwrap_or_else(|| panic!("{top} is in no layer; add it"));
        seen += 1;
        for name in &refs.crate_modules {
            if let Some(layer) = layer_of(&layers, name) {
                if layer > own {
                    wrong.push(format!("{} imports crate::{name}", rel.display()));
                }
            }
        }
        // Nothing below the command line knows clap or its raw flag types.
        if !matches!(top, "cli" | "app") && !refs.flag_types.is_empty() {
            wrong.push(format!("{} uses {:?}", rel.display(), refs.flag_types));
        }
    }
    assert!(seen > 100, "only {seen} files read");
    assert!(!test_only.is_empty(), "no test-only module file found: the exemption is broken");
    assert!(wrong.is_empty(), "upward imports:\n{}", wrong.join("\n"));
}

/// Every top-level module of the library is in exactly one layer.
#[test]
fn every_module_has_one_layer() {
    let layers = layers();
    let lib = std::fs::read_to_string(src().join("lib.rs")).unwrap();
    for line in lib.lines() {
        if let Some(name) =
            line.trim().strip_prefix("pub mod").map(|m| m.trim().trim_end_matches(';'))
        {
            let n = layers.iter().filter(|l| l.iter().any(|m| m == name)).count();
            assert_eq!(n, 1, "module {name} is in {n} layers");
        }
    }
}

/// The checker sees what it must: an upward path in code is found, the same in a test module is
/// not.
#[test]
fn the_checker_finds_an_upward_path_and_exempts_tests() {
    let code = "use crate::cmd::x; fn f() { crate::tui::y(); } \
                #[cfg(test)] mod tests { use crate::app::z; }";
    let mut refs = Refs::default();
    refs.visit_file(&syn::parse_file(code).unwrap());
    assert!(refs.crate_modules.contains("cmd"));
    assert!(refs.crate_modules.contains("tui"));
    assert!(!refs.crate_modules.contains("app"));
}

/// Code lines of a file: not blank, not a comment, and before its first `#[cfg(test)]`.
fn code_lines(text: &str) -> usize {
    text.lines()
        .take_while(|l| l.trim() != "#[cfg(test)]")
        .filter(|l| {
            let t = l.trim();
            !t.is_empty() && !t.starts_with("//")
        })
        .count()
}

/// A command module is wiring: it reads its options, starts the pipeline and hands results to
/// outputs. Work that grows it past this belongs in the layer whose meaning it has.
const WIRING_MAX_LINES: usize = 150;

#[test]
fn command_modules_are_wiring_only() {
    let mut files = Vec::new();
    visit(&src().join("cmd"), &mut files);
    assert!(files.len() > 5, "src/cmd holds {} files", files.len());
    let long: Vec<String> = files
        .iter()
        .map(|f| (f, code_lines(&std::fs::read_to_string(f).unwrap())))
        .filter(|(_, n)| *n > WIRING_MAX_LINES)
        .map(|(f, n)| format!("{} has {n} code lines", f.display()))
        .collect();
    assert!(long.is_empty(), "over {WIRING_MAX_LINES} code lines: {long:?}");
}

#[test]
fn code_lines_skip_blanks_comments_and_tests() {
    let text = "//! doc\nfn a() {}\n\n    // note\nlet x = 1;\n#[cfg(test)]\nmod tests {}\n";
    assert_eq!(code_lines(text), 2);
}
