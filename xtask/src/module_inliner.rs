//! Inlines a graph of ES modules into one module, for the self-contained page.
//!
//! Each module becomes an immediately called function returning its exports:
//!
//! ```text
//! const __module_2 = (() => {
//!   const { makeZip } = __module_1;      // was: import { makeZip } from './zip.js';
//!   function crc32() { … }               // was: export function crc32() { … }
//!   return { crc32 };
//! })();
//! ```
//!
//! so names stay private to their module as before. Only the module syntax the
//! project uses is accepted, each statement on one line starting in column 0:
//! `import { a, b as c } from './x.js';`, `import * as ns from './x.js';`,
//! `import d from './x.js';`, `import d, { a } from './x.js';`,
//! `export function|async function|class|const|let NAME…`,
//! `export { a, b as c };`, `export default NAME;`. Anything else is an error,
//! so a new construct cannot be silently mis-bundled.

use crate::Result;
use std::collections::HashMap;
use std::path::{Component, Path, PathBuf};

/// One parsed module.
struct Module {
    /// `(local name, exported name)`; the default export is exported as `default`.
    exports: Vec<(String, String)>,
    /// The body with `import` lines replaced by destructuring and `export` removed.
    body: String,
}

/// Inlines the module at `entry` and everything it imports into one script
/// meant to run as `<script type="module">` (or a module worker).
pub fn inline_modules(entry: &Path) -> Result<String> {
    let mut order: Vec<PathBuf> = Vec::new();
    let mut modules: HashMap<PathBuf, Module> = HashMap::new();
    visit(&normalise(entry), &mut Vec::new(), &mut order, &mut modules)?;
    let index: HashMap<&PathBuf, usize> = order.iter().enumerate().map(|(i, p)| (p, i)).collect();
    let mut out = String::new();
    for (i, path) in order.iter().enumerate() {
        let module = &modules[path];
        let body = resolve_placeholders(&module.body, path, &index)?;
        out.push_str(&format!("// {}\n", path.file_name().and_then(|n| n.to_str()).unwrap_or("module")));
        if i + 1 == order.len() {
            out.push_str(&format!("(() => {{\n{body}\n}})();\n"));
        } else {
            let exported: Vec<String> = module
                .exports
                .iter()
                .map(|(local, name)| if local == name { local.clone() } else { format!("{name}: {local}") })
                .collect();
            out.push_str(&format!(
                "const __module_{i} = (() => {{\n{body}\nreturn {{ {} }};\n}})();\n",
                exported.join(", ")
            ));
        }
    }
    Ok(out)
}

/// [`inline_modules`] as a classic script, for a worker started from a Blob
/// URL by a page opened from disk (Chromium refuses module workers from
/// `blob:` URLs of a `file://` page). The one module-only expression left,
/// `import.meta.url`, becomes the worker's own address `self.location.href`.
pub fn inline_modules_as_classic_script(entry: &Path) -> Result<String> {
    let script = inline_modules(entry)?.replace("import.meta.url", "self.location.href");
    if script.contains("import.meta") {
        return Err(format!("{}: 'import.meta' other than import.meta.url cannot run in a classic script", entry.display()));
    }
    Ok(script)
}

/// Depth-first: imported modules come before their importers.
fn visit(
    path: &PathBuf,
    stack: &mut Vec<PathBuf>,
    order: &mut Vec<PathBuf>,
    modules: &mut HashMap<PathBuf, Module>,
) -> Result<()> {
    if modules.contains_key(path) {
        return Ok(());
    }
    if stack.contains(path) {
        return Err(format!("{}: import cycle", path.display()));
    }
    let source = std::fs::read_to_string(path).map_err(|e| format!("{}: cannot read: {e}", path.display()))?;
    let (module, imports) = parse(path, &source)?;
    stack.push(path.clone());
    for dependency in &imports {
        visit(dependency, stack, order, modules)?;
    }
    stack.pop();
    modules.insert(path.clone(), module);
    order.push(path.clone());
    Ok(())
}

/// `import` lines become `const … = __MODULE[path]__;` placeholders, filled in
/// once every module has its index.
fn parse(path: &Path, source: &str) -> Result<(Module, Vec<PathBuf>)> {
    let dir = path.parent().unwrap_or(Path::new("."));
    let mut body = String::with_capacity(source.len());
    let mut exports = Vec::new();
    let mut imports = Vec::new();
    for (n, line) in source.lines().enumerate() {
        let at = || format!("{}:{}", path.display(), n + 1);
        if let Some(rest) = line.strip_prefix("import ") {
            let (clause, specifier) = rest
                .trim_end()
                .strip_suffix(';')
                .and_then(|r| r.rsplit_once(" from "))
                .ok_or_else(|| format!("{}: unsupported import: {line}", at()))?;
            let specifier = specifier.trim().trim_matches(|c| c == '\'' || c == '"');
            if !(specifier.starts_with("./") || specifier.starts_with("../")) {
                return Err(format!("{}: only relative imports can be inlined: {line}", at()));
            }
            let target = normalise(&dir.join(specifier));
            let placeholder = format!("__MODULE[{}]__", target.display());
            imports.push(target);
            body.push_str(&import_binding(clause.trim(), &placeholder).ok_or_else(|| format!("{}: unsupported import: {line}", at()))?);
            body.push('\n');
        } else if let Some(rest) = line.strip_prefix("export ") {
            let (kept, names) = export_statement(rest).ok_or_else(|| format!("{}: unsupported export: {line}", at()))?;
            exports.extend(names);
            body.push_str(&kept);
            body.push('\n');
        } else {
            if line.contains("</script") {
                return Err(format!("{}: '</script' would end the inline script", at()));
            }
            body.push_str(line);
            body.push('\n');
        }
    }
    Ok((Module { exports, body }, imports))
}

/// `{ a, b as c }` / `* as ns` / `d` / `d, { a }` -> a `const` binding from `source`.
fn import_binding(clause: &str, source: &str) -> Option<String> {
    if let Some(ns) = clause.strip_prefix("* as ") {
        return is_name(ns.trim()).then(|| format!("const {} = {source};", ns.trim()));
    }
    let (default, named) = match clause.find('{') {
        Some(0) => (None, Some(clause)),
        Some(i) => (Some(clause[..i].trim().trim_end_matches(',').trim()), Some(&clause[i..])),
        None => (Some(clause), None),
    };
    let mut fields = Vec::new();
    if let Some(d) = default {
        if !is_name(d) {
            return None;
        }
        fields.push(format!("default: {d}"));
    }
    if let Some(named) = named {
        let inner = named.strip_prefix('{')?.strip_suffix('}')?;
        for item in inner.split(',').map(str::trim).filter(|s| !s.is_empty()) {
            match item.split_once(" as ") {
                Some((name, local)) if is_name(name.trim()) && is_name(local.trim()) => {
                    fields.push(format!("{}: {}", name.trim(), local.trim()))
                }
                None if is_name(item) => fields.push(item.to_string()),
                _ => return None,
            }
        }
    }
    Some(format!("const {{ {} }} = {source};", fields.join(", ")))
}

/// What remains of an `export …` line and the `(local, exported)` names it adds.
fn export_statement(rest: &str) -> Option<(String, Vec<(String, String)>)> {
    for keyword in ["async function ", "function ", "class ", "const ", "let "] {
        if let Some(after) = rest.strip_prefix(keyword) {
            let name: String = after.chars().take_while(|c| c.is_alphanumeric() || *c == '_' || *c == '$').collect();
            return is_name(&name).then(|| (rest.to_string(), vec![(name.clone(), name)]));
        }
    }
    if let Some(after) = rest.strip_prefix("default ") {
        let after = after.trim();
        if let Some(name) = after.strip_suffix(';').filter(|n| is_name(n)) {
            return Some((String::new(), vec![(name.to_string(), "default".to_string())]));
        }
        for keyword in ["async function ", "function ", "class "] {
            if let Some(tail) = after.strip_prefix(keyword) {
                let name: String = tail.chars().take_while(|c| c.is_alphanumeric() || *c == '_' || *c == '$').collect();
                return is_name(&name).then(|| (after.to_string(), vec![(name, "default".to_string())]));
            }
        }
        return None;
    }
    let inner = rest.trim().strip_suffix(';')?.trim().strip_prefix('{')?.strip_suffix('}')?;
    let mut names = Vec::new();
    for item in inner.split(',').map(str::trim).filter(|s| !s.is_empty()) {
        match item.split_once(" as ") {
            Some((local, name)) if is_name(local.trim()) && is_name(name.trim()) => {
                names.push((local.trim().to_string(), name.trim().to_string()))
            }
            None if is_name(item) => names.push((item.to_string(), item.to_string())),
            _ => return None,
        }
    }
    Some((String::new(), names))
}

fn is_name(text: &str) -> bool {
    let mut chars = text.chars();
    matches!(chars.next(), Some(c) if c.is_alphabetic() || c == '_' || c == '$')
        && chars.all(|c| c.is_alphanumeric() || c == '_' || c == '$')
}

fn resolve_placeholders(body: &str, path: &Path, index: &HashMap<&PathBuf, usize>) -> Result<String> {
    let mut out = String::with_capacity(body.len());
    let mut rest = body;
    while let Some(start) = rest.find("__MODULE[") {
        out.push_str(&rest[..start]);
        let after = &rest[start + "__MODULE[".len()..];
        let end = after.find("]__").ok_or_else(|| format!("{}: broken import placeholder", path.display()))?;
        let target = PathBuf::from(&after[..end]);
        let i = index.get(&target).ok_or_else(|| format!("{}: import of unknown module {}", path.display(), target.display()))?;
        out.push_str(&format!("__module_{i}"));
        rest = &after[end + "]__".len()..];
    }
    out.push_str(rest);
    Ok(out)
}

/// Removes `.` and `a/..` from a path without touching the file system.
fn normalise(path: &Path) -> PathBuf {
    let mut out = PathBuf::new();
    for component in path.components() {
        match component {
            Component::CurDir => {}
            Component::ParentDir => {
                out.pop();
            }
            other => out.push(other),
        }
    }
    out
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn import_forms_become_bindings() {
        assert_eq!(import_binding("{ a, b as c }", "M").unwrap(), "const { a, b: c } = M;");
        assert_eq!(import_binding("* as ns", "M").unwrap(), "const ns = M;");
        assert_eq!(import_binding("init, { Session }", "M").unwrap(), "const { default: init, Session } = M;");
        assert_eq!(import_binding("init", "M").unwrap(), "const { default: init } = M;");
        assert!(import_binding("{ a b }", "M").is_none());
    }

    #[test]
    fn export_forms_are_recorded() {
        let (kept, names) = export_statement("async function load(x) {").unwrap();
        assert_eq!(kept, "async function load(x) {");
        assert_eq!(names, vec![("load".into(), "load".into())]);
        let (kept, names) = export_statement("{ initSync, __wbg_init as default };").unwrap();
        assert_eq!(kept, "");
        assert_eq!(names, vec![("initSync".into(), "initSync".into()), ("__wbg_init".into(), "default".into())]);
        assert_eq!(export_statement("default __wbg_init;").unwrap().1, vec![("__wbg_init".into(), "default".into())]);
        assert!(export_statement("* from './x.js';").is_none());
    }

    #[test]
    fn a_module_graph_runs_in_dependency_order() {
        let dir = std::env::temp_dir().join(format!("xtask-inline-test-{}", std::process::id()));
        std::fs::create_dir_all(dir.join("views")).unwrap();
        std::fs::write(dir.join("zip.js"), "export function size(x) {\n  return x.length;\n}\nconst hidden = 1;\n").unwrap();
        std::fs::write(
            dir.join("views/a.js"),
            "import { size } from '../zip.js';\nexport const A = size('abc');\n",
        )
        .unwrap();
        std::fs::write(
            dir.join("main.js"),
            "import { A } from './views/a.js';\nimport * as z from './zip.js';\nresult = A + z.size('xy');\n",
        )
        .unwrap();
        let out = inline_modules(&dir.join("main.js")).unwrap();
        let zip = out.find("function size").unwrap();
        let a = out.find("const A = size").unwrap();
        let main = out.find("result = A").unwrap();
        assert!(zip < a && a < main, "{out}");
        assert_eq!(out.matches("function size").count(), 1, "a shared module is inlined once: {out}");
        assert!(out.contains("return { size };"), "{out}");
        assert!(out.contains("const { size } = __module_0;"), "{out}");
        assert!(out.contains("const z = __module_0;"), "{out}");
        std::fs::write(dir.join("worker.js"), "import { size } from './zip.js';\nconst url = new URL('x.wasm', import.meta.url);\n").unwrap();
        let classic = inline_modules_as_classic_script(&dir.join("worker.js")).unwrap();
        assert!(classic.contains("new URL('x.wasm', self.location.href)") && !classic.contains("import.meta"), "{classic}");
        std::fs::write(dir.join("bad.js"), "export * from './zip.js';\n").unwrap();
        let err = inline_modules(&dir.join("bad.js")).unwrap_err();
        assert!(err.contains("bad.js:1") && err.contains("unsupported export"), "{err}");
        std::fs::remove_dir_all(&dir).unwrap();
    }
}
