//! The analysis crate's layers, written once, and a check that every module
//! imports only layers below its own.
//!
//! A module's layer is its top-level name under `analysis/src/` (`fit`,
//! `render`, …). A reference is any `crate::NAME` path outside a comment,
//! whether in a `use` line or inline, each element of a grouped import
//! `crate::{a, b}`, and a `super::` path that climbs to the crate root.
//! Modules in the same layer may not import each other either: a piece two
//! of them share belongs a layer
//! below both. Submodules within one top-level module are not checked here.

use std::collections::BTreeSet;
use std::path::Path;

/// The layers, lowest first. Each entry lists the top-level modules of one
/// layer; a module may import only modules of earlier entries.
const LAYERS: &[&[&str]] = &[
    // The error type.
    &["error"],
    // Foundations: extended arithmetic, document names, distributions and quantiles, digit grouping,
    // the exact byte forms of states that cross processes.
    &["numeric", "schema", "stats", "grouping", "state_bytes"],
    // Where parcels lie: spatial weights and Moran's I.
    &["spatial"],
    // Files to frames.
    &["data"],
    // What to fit: specifications and design matrices.
    &["model"],
    // Solving.
    &["fit"],
    // Reading a fit: tests, intervals, distributions, the JSON summary.
    &["inference"],
    // Uses of a fit, side by side.
    &["predict", "diagnose", "compare", "value", "accuracy"],
    // Models built from many fits: by group (per-group fits, pooled models, equality
    // tests, valuing by group), over the map (local fits), and one parcel explained
    // with comparable sales adjusted by a model (appeal pages).
    &["strata", "local", "appeal"],
    // Charts, and the documents we write (each read back through its type).
    &["plot", "documents"],
    // What moved between two runs, read from their documents.
    &["drift"],
    // Everything people read.
    &["render"],
];

/// Modules exempt from the check: the crate root re-exports every layer.
const EXEMPT: &[&str] = &["lib"];

fn layer_of(module: &str) -> Option<usize> {
    LAYERS.iter().position(|layer| layer.contains(&module))
}

/// The top-level modules one source text refers to, comments left out:
/// `crate::NAME` paths (inline or in `use`), grouped imports
/// `crate::{a, b::c}` (the group may span lines), and `super::` paths that
/// climb to the crate root from `file` (`x.rs` and `x/mod.rs` are one level
/// deep, `x/y.rs` two, …) outside the file's `#[cfg(test)]` module.
fn references(file: &str, source: &str) -> Vec<String> {
    let code: String = source.lines().map(|line| line.split("//").next().unwrap_or("")).collect::<Vec<_>>().join("\n");
    let name_at = |text: &str| -> String { text.chars().take_while(|c| c.is_ascii_lowercase() || *c == '_').collect() };
    let mut out = Vec::new();
    // Paths from the crate root.
    let mut rest = code.as_str();
    while let Some(at) = rest.find("crate::") {
        let after = &rest[at + "crate::".len()..];
        if let Some(group) = after.strip_prefix('{') {
            // Each element of the group at depth one names a module.
            let (mut depth, mut element_start) = (1usize, true);
            for (i, c) in group.char_indices() {
                match c {
                    '{' => depth += 1,
                    '}' => {
                        depth -= 1;
                        if depth == 0 {
                            break;
                        }
                    }
                    ',' if depth == 1 => element_start = true,
                    c if element_start && depth == 1 && !c.is_whitespace() => {
                        let name = name_at(&group[i..]);
                        if !name.is_empty() && name != "self" {
                            out.push(name);
                        }
                        element_start = false;
                    }
                    _ => {}
                }
            }
        } else {
            let name = name_at(after);
            if !name.is_empty() {
                out.push(name);
            }
        }
        rest = after;
    }
    // `super::` paths that reach the crate root, before the file's inline
    // test module (where `super::` is the file's own module).
    let parts: Vec<&str> = file.trim_end_matches(".rs").split('/').collect();
    let depth = if parts.last() == Some(&"mod") { parts.len() - 1 } else { parts.len() };
    let outside_tests = code.split("#[cfg(test)]").next().unwrap_or("");
    let mut rest = outside_tests;
    while let Some(at) = rest.find("super::") {
        // Count the whole run of `super::` starting here (not one already counted).
        let preceded = rest[..at].ends_with("super::");
        let mut after = &rest[at..];
        let mut climbs = 0;
        while let Some(next) = after.strip_prefix("super::") {
            climbs += 1;
            after = next;
        }
        if !preceded && climbs >= depth {
            let name = name_at(after);
            if !name.is_empty() {
                out.push(name);
            }
        }
        rest = &rest[at + "super::".len()..];
    }
    out
}

/// Every import that breaks the layering, as `module → imported (file)`,
/// for sources given as `(top-level module, file name, text)`.
fn violations(sources: &[(String, String, String)]) -> Vec<String> {
    let mut out = Vec::new();
    for (module, file, text) in sources {
        if EXEMPT.contains(&module.as_str()) {
            continue;
        }
        let Some(own) = layer_of(module) else {
            out.push(format!("{module} ({file}) is in no layer: add it to LAYERS in tests/analysis/layers.rs"));
            continue;
        };
        for imported in references(file, text) {
            if imported == *module {
                continue;
            }
            match layer_of(&imported) {
                Some(layer) if layer < own => {}
                Some(_) => {
                    out.push(format!("{module} → {imported} ({file}): imports a module of its own or a higher layer"))
                }
                None => out.push(format!("{module} → {imported} ({file}): {imported} is in no layer")),
            }
        }
    }
    out.sort();
    out.dedup();
    out
}

/// Reads every `.rs` file under `dir`, naming each by its top-level module.
fn read_sources(root: &Path, dir: &Path, out: &mut Vec<(String, String, String)>) {
    let mut entries: Vec<_> = std::fs::read_dir(dir).expect("read the source folder").flatten().collect();
    entries.sort_by_key(|e| e.path());
    for entry in entries {
        let path = entry.path();
        if path.is_dir() {
            read_sources(root, &path, out);
        } else if path.extension().is_some_and(|e| e == "rs") {
            let relative = path.strip_prefix(root).expect("under the root");
            let first = relative.components().next().expect("a component").as_os_str().to_string_lossy().to_string();
            let module = first.trim_end_matches(".rs").to_string();
            let text = std::fs::read_to_string(&path).expect("read a source file");
            out.push((module, relative.display().to_string(), text));
        }
    }
}

#[test]
fn the_analysis_crate_imports_only_downward() {
    let root = plumbline_tests::repo_root().join("analysis").join("src");
    let mut sources = Vec::new();
    read_sources(&root, &root, &mut sources);
    let modules: BTreeSet<&str> = sources.iter().map(|(m, _, _)| m.as_str()).collect();
    assert!(modules.contains("render") && modules.contains("fit"), "read the crate's modules: {modules:?}");
    let found = violations(&sources);
    assert!(found.is_empty(), "imports against the layer order:\n{}", found.join("\n"));
}

#[test]
fn an_upward_or_sideways_import_is_caught() {
    let source = |module: &str, text: &str| (module.to_string(), format!("{module}/x.rs"), text.to_string());
    let sources = vec![
        // Upward: the solver reaching into reports.
        source("fit", "use crate::render::fit_text;\n"),
        // Sideways: two peers of one layer.
        source("value", "fn f() { crate::compare::nested_test(a, b); }\n"),
        // Downward, and in a comment: both fine.
        source("render", "use crate::fit::Fit;\n// see crate::drift for the reader\n"),
        source("newthing", "use crate::data::Frame;\n"),
        // A grouped import over lines, reaching up and sideways.
        source("compare", "use crate::{\n    fit::Fit,\n    drift::{self, drift},\n    error::Result,\n};\n"),
        // `super::` from a top-level file climbs to the crate root.
        ("predict".to_string(), "predict.rs".to_string(), "use super::render::Report;\n".to_string()),
        // … but within a module it stays inside it.
        source("plot", "use super::theme::INK;\n"),
    ];
    let found = violations(&sources);
    assert_eq!(
        found,
        vec![
            "compare → drift (compare/x.rs): imports a module of its own or a higher layer".to_string(),
            "fit → render (fit/x.rs): imports a module of its own or a higher layer".to_string(),
            "newthing (newthing/x.rs) is in no layer: add it to LAYERS in tests/analysis/layers.rs".to_string(),
            "predict → render (predict.rs): imports a module of its own or a higher layer".to_string(),
            "value → compare (value/x.rs): imports a module of its own or a higher layer".to_string(),
        ]
    );
}

/// The types of each top-level module that declare `pub(crate)` fields, as
/// `(module, type)`: a `struct` (of any visibility) whose body holds a field
/// written `pub(crate) name:`.
fn types_with_crate_fields(sources: &[(String, String, String)]) -> Vec<(String, String)> {
    let mut out = Vec::new();
    for (module, _, text) in sources {
        let mut rest = text.as_str();
        while let Some(at) = rest.find("struct ") {
            let after = &rest[at + "struct ".len()..];
            let name: String = after.chars().take_while(|c| c.is_ascii_alphanumeric() || *c == '_').collect();
            let body = match (after.find('{'), after.find(';')) {
                (Some(open), semicolon) if semicolon.is_none_or(|s| open < s) => {
                    let close = after[open..].find("\n}").map_or(after.len(), |c| open + c);
                    &after[open..close]
                }
                _ => "",
            };
            let crate_field = body
                .lines()
                .any(|l| l.trim_start().starts_with("pub(crate) ") && l.contains(':') && !l.contains("fn "));
            if !name.is_empty() && crate_field {
                out.push((module.clone(), name));
            }
            rest = after;
        }
    }
    out.sort();
    out.dedup();
    out
}

/// Every file that names, from another top-level module, a type whose
/// fields are open to the whole crate (`pub(crate)`): such a type's data is
/// behind its methods only by convention, so a layer above could read or
/// write it directly. Reported as `module → Type's pub(crate) fields (file)`.
fn reach_ins(sources: &[(String, String, String)]) -> Vec<String> {
    let open_types = types_with_crate_fields(sources);
    let mut out = Vec::new();
    for (module, file, text) in sources {
        if EXEMPT.contains(&module.as_str()) {
            continue;
        }
        let code: String =
            text.lines().map(|line| line.split("//").next().unwrap_or("")).collect::<Vec<_>>().join("\n");
        for (owner, name) in &open_types {
            if owner == module {
                continue;
            }
            let named = code.match_indices(name.as_str()).any(|(at, _)| {
                let before = code[..at].chars().last().is_none_or(|c| !(c.is_ascii_alphanumeric() || c == '_'));
                let after =
                    code[at + name.len()..].chars().next().is_none_or(|c| !(c.is_ascii_alphanumeric() || c == '_'));
                before && after
            });
            if named {
                out.push(format!(
                    "{module} → {name}'s pub(crate) fields ({file}): give {name} methods, or keep it inside {owner}"
                ));
            }
        }
    }
    out.sort();
    out.dedup();
    out
}

#[test]
fn no_layer_reaches_into_another_layers_fields() {
    let root = plumbline_tests::repo_root().join("analysis").join("src");
    let mut sources = Vec::new();
    read_sources(&root, &root, &mut sources);
    let found = reach_ins(&sources);
    assert!(found.is_empty(), "types whose pub(crate) fields another layer can reach:\n{}", found.join("\n"));
}

#[test]
fn a_reach_into_crate_fields_is_caught() {
    let source = |module: &str, text: &str| (module.to_string(), format!("{module}/x.rs"), text.to_string());
    let sources = vec![
        // `fit` opens a field to the crate; `predict` names the type.
        source("fit", "pub struct Fit {\n    pub(crate) design: Design,\n    kept: usize,\n}\n"),
        source("predict", "use crate::fit::Fit;\nfn f(fit: &Fit) -> usize { fit.design.n() }\n"),
        // Private fields and methods are fine, and so is a type named only in a comment.
        source(
            "model",
            "pub struct Design {\n    columns: Vec<f64>,\n}\nimpl Design { pub(crate) fn n(&self) -> usize { 0 } }\n",
        ),
        source("render", "// a Fit is shown elsewhere\nuse crate::model::Design;\n"),
        // A type named inside a longer identifier is not a reach-in.
        source("value", "struct FitLike;\n"),
    ];
    assert_eq!(types_with_crate_fields(&sources), vec![("fit".to_string(), "Fit".to_string())]);
    assert_eq!(
        reach_ins(&sources),
        vec!["predict → Fit's pub(crate) fields (predict/x.rs): give Fit methods, or keep it inside fit".to_string()]
    );
}
