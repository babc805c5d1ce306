//! The layering of the library: every module may import only the modules
//! the architecture table of DEVELOPERS.md lists for it, so data flows one
//! way. This reads the table and every `crate::` path in each module's
//! code (comments left out) and fails on any path the table does not
//! allow.

use std::collections::{BTreeMap, BTreeSet};
use std::path::{Path, PathBuf};

/// The modules of the table and what each may import, read from the rows
/// whose first cell is a module (`` `spec/` ``) and whose last cell lists
/// the modules it may import (`` `approx`, `synth` `` or "nothing").
fn table() -> BTreeMap<String, BTreeSet<String>> {
    let text = std::fs::read_to_string(Path::new(env!("CARGO_MANIFEST_DIR")).join("DEVELOPERS.md"))
        .expect("DEVELOPERS.md");
    let mut rules = BTreeMap::new();
    for line in text.lines() {
        let cells: Vec<&str> = line
            .trim()
            .trim_matches('|')
            .split('|')
            .map(str::trim)
            .collect();
        let Some(first) = cells.first() else { continue };
        let Some(module) = first.strip_prefix('`').and_then(|m| m.strip_suffix("/`")) else {
            continue;
        };
        let allowed = cells
            .last()
            .unwrap_or(&"")
            .split(',')
            .map(|m| m.trim().trim_matches('`').trim_end_matches('/').to_string())
            .filter(|m| !m.is_empty() && m != "nothing")
            .collect();
        rules.insert(module.to_string(), allowed);
    }
    rules
}

/// Every `.rs` file of module `name` (its folder, or its single file).
fn files(name: &str) -> Vec<PathBuf> {
    let src = Path::new(env!("CARGO_MANIFEST_DIR")).join("src");
    let mut out = Vec::new();
    let mut stack = vec![src.join(name)];
    let single = src.join(format!("{name}.rs"));
    if single.exists() {
        out.push(single);
    }
    while let Some(dir) = stack.pop() {
        let Ok(entries) = std::fs::read_dir(&dir) else {
            continue;
        };
        for e in entries {
            let path = e.expect("a folder entry").path();
            if path.is_dir() {
                stack.push(path);
            } else if path.extension().is_some_and(|x| x == "rs") {
                out.push(path);
            }
        }
    }
    out
}

/// The modules named by `crate::<module>` paths in the code of `text`
/// (comment lines left out: doc links do not make a dependency).
fn imports(text: &str) -> BTreeSet<String> {
    let mut found = BTreeSet::new();
    for line in text.lines() {
        let code = line.trim_start();
        if code.starts_with("//") {
            continue;
        }
        for (i, _) in code.match_indices("crate::") {
            let rest = &code[i + "crate::".len()..];
            let module: String = rest
                .chars()
                .take_while(|c| c.is_ascii_alphanumeric() || *c == '_')
                .collect();
            if !module.is_empty() {
                found.insert(module);
            }
        }
    }
    found
}

#[test]
fn every_module_imports_only_what_the_architecture_table_allows() {
    let rules = table();
    assert!(
        rules.len() >= 10,
        "DEVELOPERS.md's architecture table lists the modules: {rules:?}"
    );
    let lib = std::fs::read_to_string(Path::new(env!("CARGO_MANIFEST_DIR")).join("src/lib.rs"))
        .expect("src/lib.rs");
    let declared: BTreeSet<String> = lib
        .lines()
        .filter_map(|l| l.trim().strip_prefix("pub mod "))
        .map(|m| m.trim_end_matches(';').to_string())
        .collect();
    let listed: BTreeSet<String> = rules.keys().cloned().collect();
    assert_eq!(declared, listed, "src/lib.rs's modules against the table");
    let mut broken = Vec::new();
    for (module, allowed) in &rules {
        for path in files(module) {
            let text = std::fs::read_to_string(&path).expect("a source file");
            for used in imports(&text) {
                if &used != module && !allowed.contains(&used) {
                    broken.push(format!("{} imports crate::{used}", path.display()));
                }
            }
        }
    }
    assert!(
        broken.is_empty(),
        "imports the table of DEVELOPERS.md does not allow:\n{}",
        broken.join("\n")
    );
}

/// The check itself: a path in code counts, one in a comment does not.
#[test]
fn imports_are_read_from_code_not_comments() {
    let text = "use crate::circuit::Netlist;\n//! see [`crate::design`]\nlet x = crate::parts::Series::E3;";
    let got: Vec<String> = imports(text).into_iter().collect();
    assert_eq!(got, ["circuit", "parts"]);
}
