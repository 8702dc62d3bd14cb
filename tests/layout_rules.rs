//! The layout rules of DEVELOPERS.md ("Map of the parts"), checked by reading the source.
//!
//! Each file under `src/` belongs to a part: its first folder, or its own name for the
//! files at the top (`error`, `limits`, `rng`, `trace` are support every part may use).
//! The test reads every `crate::` path (in `use` lines and in the code) and every
//! `super::` path, and checks who may know whom, that files form no cycle, that no file
//! holds more than 600 lines of code, and that no library message names a flag.

use std::collections::{BTreeMap, BTreeSet};
use std::path::{Path, PathBuf};

const SUPPORT: &[&str] = &["error", "limits", "rng", "trace"];
const WORKFLOWS: &[&str] = &["reduce", "separate", "landcover", "sweep", "batch", "learn"];
/// Most lines of code in one file (blank lines, comments and the test module not counted).
const MAX_CODE_LINES: usize = 600;

struct SourceFile {
    /// Path under src/ with `/` separators, e.g. `cluster/hard.rs`.
    rel: String,
    /// Module path, e.g. `["cluster", "hard"]`; empty for lib.rs.
    module: Vec<String>,
    /// The text without the `#[cfg(test)] mod tests { … }` block.
    code: String,
}

fn src_dir() -> PathBuf {
    Path::new(env!("CARGO_MANIFEST_DIR")).join("src")
}

fn walk(dir: &Path, out: &mut Vec<PathBuf>) {
    let mut entries: Vec<_> = std::fs::read_dir(dir)
        .unwrap()
        .map(|e| e.unwrap().path())
        .collect();
    entries.sort();
    for p in entries {
        if p.is_dir() {
            walk(&p, out);
        } else if p.extension().is_some_and(|e| e == "rs") {
            out.push(p);
        }
    }
}

/// The file's text up to its inline test module (a sibling `tests.rs` is its own file and
/// is skipped by the caller).
fn without_tests(text: &str) -> String {
    match text.find("#[cfg(test)]\nmod tests {") {
        Some(i) => text[..i].to_string(),
        None => text.to_string(),
    }
}

fn sources() -> Vec<SourceFile> {
    let root = src_dir();
    let mut paths = Vec::new();
    walk(&root, &mut paths);
    let mut files = Vec::new();
    for p in paths {
        let rel = p
            .strip_prefix(&root)
            .unwrap()
            .to_string_lossy()
            .replace('\\', "/");
        if rel == "main.rs" || rel.ends_with("/tests.rs") || rel.ends_with("_tests.rs") {
            continue;
        }
        let mut module: Vec<String> = rel
            .trim_end_matches(".rs")
            .split('/')
            .map(String::from)
            .collect();
        if module.last().is_some_and(|m| m == "mod" || m == "lib") {
            module.pop();
        }
        let text = std::fs::read_to_string(&p).unwrap();
        files.push(SourceFile {
            rel,
            module,
            code: without_tests(&text),
        });
    }
    files
}

/// Lines of code: not blank, not a comment.
fn code_lines(code: &str) -> usize {
    code.lines()
        .map(str::trim)
        .filter(|l| !l.is_empty() && !l.starts_with("//"))
        .count()
}

/// Strips comments and string literals so that paths in prose are not read as code.
fn strip_comments_and_strings(code: &str) -> String {
    let mut out = String::with_capacity(code.len());
    let b = code.as_bytes();
    let mut i = 0;
    while i < b.len() {
        if b[i] == b'/' && i + 1 < b.len() && b[i + 1] == b'/' {
            while i < b.len() && b[i] != b'\n' {
                i += 1;
            }
        } else if b[i] == b'"' && (i == 0 || b[i - 1] != b'\'') {
            // A raw string r"…" or r#"…"# is closed by the same number of hashes.
            let mut hashes = 0;
            let mut j = i;
            while j > 0 && b[j - 1] == b'#' {
                hashes += 1;
                j -= 1;
            }
            let raw = j > 0 && b[j - 1] == b'r';
            i += 1;
            while i < b.len() {
                if !raw && b[i] == b'\\' {
                    i += 2;
                    continue;
                }
                if b[i] == b'"' && (0..hashes).all(|h| b.get(i + 1 + h) == Some(&b'#')) {
                    i += 1 + hashes;
                    break;
                }
                i += 1;
            }
            out.push_str("\"\"");
        } else {
            out.push(b[i] as char);
            i += 1;
        }
    }
    out
}

/// Every path that starts with `crate::` or `super::`, expanded through `{…}` groups,
/// as module segments (leading identifiers only).
fn referenced_paths(code: &str) -> Vec<(String, Vec<String>)> {
    let code = strip_comments_and_strings(code);
    let mut found = Vec::new();
    for start in ["crate::", "super::"] {
        let mut from = 0;
        while let Some(pos) = code[from..].find(start) {
            let at = from + pos;
            from = at + start.len();
            if at > 0 {
                let prev = code.as_bytes()[at - 1];
                let inside_a_name = prev.is_ascii_alphanumeric()
                    || prev == b'_'
                    || prev == b':' && start == "super::";
                // `super::super::x` is read from its first `super::`.
                if inside_a_name && !(start == "super::" && code[..at].ends_with("super::")) {
                    continue;
                }
            }
            let mut prefix = vec![start.trim_end_matches("::").to_string()];
            // `super::super::x`
            let mut rest = &code[from..];
            while let Some(r) = rest.strip_prefix("super::") {
                prefix.push("super".into());
                rest = r;
            }
            expand(rest, &prefix, &mut found);
        }
    }
    found.into_iter().map(|p| (p[0].clone(), p)).collect()
}

fn expand(rest: &str, prefix: &[String], out: &mut Vec<Vec<String>>) {
    let rest = rest.trim_start();
    if let Some(inner) = rest.strip_prefix('{') {
        // Split the group at top-level commas.
        let mut depth = 0;
        let mut item_start = 0;
        for (i, c) in inner.char_indices() {
            match c {
                '{' => depth += 1,
                '}' if depth == 0 => {
                    expand(&inner[item_start..i], prefix, out);
                    return;
                }
                '}' => depth -= 1,
                ',' if depth == 0 => {
                    expand(&inner[item_start..i], prefix, out);
                    item_start = i + 1;
                }
                _ => {}
            }
        }
        return;
    }
    let ident: String = rest
        .chars()
        .take_while(|c| c.is_ascii_alphanumeric() || *c == '_')
        .collect();
    if ident.is_empty() {
        return;
    }
    let mut path = prefix.to_vec();
    if ident == "self" {
        out.push(path);
        return;
    }
    path.push(ident.clone());
    let after = rest[ident.len()..].trim_start();
    if let Some(next) = after.strip_prefix("::") {
        let next_trim = next.trim_start();
        if next_trim.starts_with('{') || next_trim.starts_with(|c: char| c.is_ascii_lowercase()) {
            expand(next, &path, out);
            return;
        }
    }
    out.push(path);
}

/// The module path a reference points into, resolved against the known modules (the
/// longest known prefix).
fn resolve(
    file: &SourceFile,
    path: &[String],
    modules: &BTreeSet<Vec<String>>,
) -> Option<Vec<String>> {
    let mut abs: Vec<String> = Vec::new();
    let mut segs = path.iter();
    match segs.next().map(String::as_str) {
        Some("crate") => {}
        Some("super") => {
            // `super` of a file's module is its parent; of mod.rs, the parent too.
            abs = file.module.clone();
            abs.pop();
        }
        _ => return None,
    }
    for s in segs {
        if s == "super" {
            abs.pop();
        } else {
            abs.push(s.clone());
        }
    }
    while !abs.is_empty() && !modules.contains(&abs) {
        abs.pop();
    }
    if abs.is_empty() {
        None
    } else {
        Some(abs)
    }
}

fn part_of(module: &[String]) -> String {
    module.first().cloned().unwrap_or_else(|| "lib".into())
}

struct Graph {
    files: Vec<SourceFile>,
    /// File index → the file modules it references, with the path as written.
    edges: Vec<BTreeMap<Vec<String>, String>>,
}

fn graph() -> Graph {
    let files = sources();
    let modules: BTreeSet<Vec<String>> = files.iter().map(|f| f.module.clone()).collect();
    let mut edges = Vec::new();
    for f in &files {
        let mut e = BTreeMap::new();
        for (_, p) in referenced_paths(&f.code) {
            if let Some(target) = resolve(f, &p, &modules) {
                if target != f.module && !f.module.starts_with(&target) {
                    e.entry(target).or_insert_with(|| p.join("::"));
                }
            }
        }
        edges.push(e);
    }
    Graph { files, edges }
}

/// Whether part `from` may name part `to`.
fn allowed(from: &str, to: &str) -> Result<(), &'static str> {
    if from == to || SUPPORT.contains(&to) || from == "lib" {
        return Ok(());
    }
    if to == "cli" {
        return Err("nothing outside cli/ imports it");
    }
    match from {
        "cluster" => Err("cluster/ knows rows and weights only (support files excepted)"),
        "colour" => Err("colour/ imports no other part"),
        "error" | "limits" | "rng" | "trace" => Err("support files import no part"),
        "raster" | "output" | "features" | "render" | "families" | "film"
            if WORKFLOWS.contains(&to) =>
        {
            Err("shared parts never import a workflow")
        }
        // The document header records the engine's options (a plain value of cluster/).
        "output" if to == "cluster" => Ok(()),
        "raster" | "output" if to != "colour" && to != "raster" && to != "output" => {
            Err("raster/ and output/ import only colour, each other and support")
        }
        w if WORKFLOWS.contains(&w) && WORKFLOWS.contains(&to) => {
            if (w == "batch" || w == "learn") && to == "reduce" {
                Ok(())
            } else {
                Err("no workflow imports another (batch and learn may call reduce)")
            }
        }
        _ => Ok(()),
    }
}

#[test]
fn parts_import_only_what_the_map_allows() {
    let g = graph();
    let mut broken = Vec::new();
    for (f, e) in g.files.iter().zip(&g.edges) {
        let from = part_of(&f.module);
        for (target, written) in e {
            let to = part_of(target);
            if let Err(rule) = allowed(&from, &to) {
                broken.push(format!("src/{} names {written}: {rule}", f.rel));
            }
        }
    }
    assert!(
        broken.is_empty(),
        "layout rules broken:\n{}",
        broken.join("\n")
    );
}

#[test]
fn files_form_no_cycle() {
    let g = graph();
    let index: BTreeMap<&Vec<String>, usize> = g
        .files
        .iter()
        .enumerate()
        .map(|(i, f)| (&f.module, i))
        .collect();
    // A file that re-exports its children (a folder's mod.rs, lib.rs) is a table of
    // contents, not a dependency: edges from a parent module into its own children are
    // not counted.
    let adj: Vec<Vec<usize>> = g
        .files
        .iter()
        .zip(&g.edges)
        .map(|(f, e)| {
            e.keys()
                .filter(|t| !t.starts_with(&f.module) || f.module.is_empty() && t.is_empty())
                .filter_map(|t| index.get(t).copied())
                .collect()
        })
        .collect();
    // Depth-first search with colours; report the first cycle found.
    fn visit(
        v: usize,
        adj: &[Vec<usize>],
        state: &mut [u8],
        stack: &mut Vec<usize>,
    ) -> Option<Vec<usize>> {
        state[v] = 1;
        stack.push(v);
        for &w in &adj[v] {
            if state[w] == 1 {
                let at = stack.iter().position(|&x| x == w).unwrap();
                return Some(stack[at..].to_vec());
            }
            if state[w] == 0 {
                if let Some(c) = visit(w, adj, state, stack) {
                    return Some(c);
                }
            }
        }
        stack.pop();
        state[v] = 2;
        None
    }
    let mut state = vec![0u8; g.files.len()];
    for v in 0..g.files.len() {
        if state[v] == 0 {
            let mut stack = Vec::new();
            if let Some(c) = visit(v, &adj, &mut state, &mut stack) {
                let names: Vec<_> = c
                    .iter()
                    .map(|&i| format!("src/{}", g.files[i].rel))
                    .collect();
                panic!("files import each other in a cycle: {}", names.join(" → "));
            }
        }
    }
}

#[test]
fn no_file_is_over_the_size_limit() {
    let big: Vec<String> = sources()
        .iter()
        .map(|f| (f.rel.clone(), code_lines(&f.code)))
        .chain(std::iter::once((
            "main.rs".to_string(),
            code_lines(&std::fs::read_to_string(src_dir().join("main.rs")).unwrap()),
        )))
        .filter(|(_, n)| *n > MAX_CODE_LINES)
        .map(|(rel, n)| format!("src/{rel}: {n} lines of code"))
        .collect();
    assert!(
        big.is_empty(),
        "files over {MAX_CODE_LINES} lines of code:\n{}",
        big.join("\n")
    );
}

/// Library messages name settings; only cli/ (and main.rs) speak of flags.
#[test]
fn no_library_message_names_a_flag() {
    let mut found = Vec::new();
    for f in sources() {
        if f.module.first().is_some_and(|m| m == "cli") {
            continue;
        }
        for (n, line) in f.code.lines().enumerate() {
            let t = line.trim_start();
            if t.starts_with("//") {
                continue;
            }
            // A flag inside a string literal: `"… --name …"` or `"-k …"`.
            let mut in_str = false;
            let bytes = t.as_bytes();
            for i in 0..bytes.len() {
                if bytes[i] == b'"' && (i == 0 || bytes[i - 1] != b'\\') {
                    in_str = !in_str;
                }
                if in_str
                    && bytes[i] == b'-'
                    && (i == 0
                        || bytes[i - 1] == b' '
                        || bytes[i - 1] == b'"'
                        || bytes[i - 1] == b'(')
                    && (bytes.get(i + 1) == Some(&b'-')
                        && bytes.get(i + 2).is_some_and(u8::is_ascii_lowercase)
                        || bytes.get(i + 1) == Some(&b'k')
                            && bytes.get(i + 2).is_some_and(|c| !c.is_ascii_alphanumeric()))
                {
                    found.push(format!("src/{}:{}: {}", f.rel, n + 1, t));
                    break;
                }
            }
        }
    }
    assert!(
        found.is_empty(),
        "library messages that name a flag:\n{}",
        found.join("\n")
    );
}

#[test]
fn the_reader_finds_paths_in_groups_and_code() {
    let code = "use crate::{colour::{self, Lab}, cluster::fit};\nfn f() { crate::raster::decode(x); super::sibling::g(); }\n// crate::cli in a comment\nconst S: &str = \"crate::cli\";";
    let mut paths: Vec<String> = referenced_paths(code)
        .into_iter()
        .map(|(_, p)| p.join("::"))
        .collect();
    paths.sort();
    assert_eq!(
        paths,
        [
            "crate::cluster::fit",
            "crate::colour",
            "crate::colour::Lab",
            "crate::raster::decode",
            "super::sibling::g"
        ]
    );
    assert_eq!(code_lines("// c\n\nfn a() {}\n  /// d\nlet x = 1;"), 2);
    assert!(allowed("sweep", "landcover").is_err());
    assert!(allowed("batch", "reduce").is_ok());
    assert!(allowed("cluster", "colour").is_err());
    assert!(allowed("reduce", "cli").is_err());
}
