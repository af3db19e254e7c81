//! `cargo xtask dist`: the browser app for hosting and for opening from disk.
//!
//! - `dist/site/`: `web/` with the built bundle, for any static host.
//! - `dist/orbitspan.html`: one self-contained file that works from `file://`.
//!   The stylesheet and the page's modules are inlined ([`inline_modules`]);
//!   the worker's modules (with the wasm-bindgen glue) sit in a
//!   `<script type="text/plain" id="orbitspan-worker-source">` block and the
//!   wasm as base64 in `<script type="text/plain" id="orbitspan-wasm-base64">`;
//!   the page starts the worker from a Blob URL of that source as a classic
//!   worker (see `web/worker-client.js`). Its Content-Security-Policy allows exactly the two
//!   inline blocks (by SHA-256 hash), `blob:` workers and wasm compilation, and
//!   nothing from any network.

use crate::module_inliner::{inline_modules, inline_modules_as_classic_script};
use crate::{browser_bundle, no_arguments, workspace_root, Result};
use sha2::{Digest, Sha256};
use std::path::Path;

pub const SITE_DIR: &str = "dist/site";
pub const SINGLE_FILE: &str = "dist/orbitspan.html";

const STYLESHEET_TAG: &str = r#"<link rel="stylesheet" href="style.css">"#;
const SCRIPT_TAG: &str = r#"<script type="module" src="main.js"></script>"#;

pub fn run(args: &[String]) -> Result<()> {
    no_arguments("dist", args)?;
    let root = workspace_root();
    browser_bundle::build(&browser_bundle::web_pkg_dir())?;
    write_site(&root.join("web"), &root.join(SITE_DIR))?;
    write_single_file(&root.join("web"), &root.join(SINGLE_FILE))?;
    println!("orbitspan: wrote {} (for a static host)", root.join(SITE_DIR).display());
    println!("orbitspan: wrote {} (one file; open it from disk)", root.join(SINGLE_FILE).display());
    Ok(())
}

/// Copies `web/` (including the built `pkg/`) to `out`, replacing what was there.
pub fn write_site(web: &Path, out: &Path) -> Result<()> {
    if out.exists() {
        std::fs::remove_dir_all(out).map_err(|e| format!("{}: cannot remove: {e}", out.display()))?;
    }
    copy_tree(web, out)
}

fn copy_tree(from: &Path, to: &Path) -> Result<()> {
    std::fs::create_dir_all(to).map_err(|e| format!("{}: cannot create: {e}", to.display()))?;
    let entries = std::fs::read_dir(from).map_err(|e| format!("{}: cannot read: {e}", from.display()))?;
    for entry in entries {
        let entry = entry.map_err(|e| format!("{}: {e}", from.display()))?;
        let (source, target) = (entry.path(), to.join(entry.file_name()));
        if entry.file_name() == ".gitignore" {
            continue;
        }
        if source.is_dir() {
            copy_tree(&source, &target)?;
        } else {
            std::fs::copy(&source, &target).map_err(|e| format!("{}: cannot copy: {e}", source.display()))?;
        }
    }
    Ok(())
}

/// Writes the self-contained page built from `web/` (whose `pkg/` must be built).
pub fn write_single_file(web: &Path, out: &Path) -> Result<()> {
    let read = |name: &str| {
        std::fs::read_to_string(web.join(name)).map_err(|e| format!("{}: cannot read: {e}", web.join(name).display()))
    };
    let html = read("index.html")?;
    let css = read("style.css")?;
    let page_script = inline_modules(&web.join("main.js"))?;
    let worker_script = inline_modules_as_classic_script(&web.join("worker.js"))?;
    let wasm_path = web.join("pkg").join(format!("{}_bg.wasm", browser_bundle::FACADE_STEM));
    let wasm = std::fs::read(&wasm_path).map_err(|e| format!("{}: cannot read (build the bundle first): {e}", wasm_path.display()))?;

    let policy = format!(
        "default-src 'none'; script-src {} blob: 'wasm-unsafe-eval'; worker-src blob:; style-src {}; \
         img-src blob: data:; base-uri 'none'; form-action 'none'",
        csp_hash(&page_script),
        csp_hash(&css)
    );
    let served_policy = crate::serve::page_policy(&html).ok_or("web/index.html: no Content-Security-Policy meta tag")?;
    let page = replace_once(&html, &served_policy, &policy, "the Content-Security-Policy")?;
    let page = replace_once(&page, STYLESHEET_TAG, &format!("<style>{css}</style>"), STYLESHEET_TAG)?;
    let scripts = format!(
        "<script type=\"text/plain\" id=\"orbitspan-worker-source\">{worker_script}</script>\n\
         <script type=\"text/plain\" id=\"orbitspan-wasm-base64\">{}</script>\n\
         <script type=\"module\">{page_script}</script>",
        base64(&wasm)
    );
    let page = replace_once(&page, SCRIPT_TAG, &scripts, SCRIPT_TAG)?;
    if let Some(dir) = out.parent() {
        std::fs::create_dir_all(dir).map_err(|e| format!("{}: cannot create: {e}", dir.display()))?;
    }
    std::fs::write(out, page).map_err(|e| format!("{}: cannot write: {e}", out.display()))
}

fn replace_once(text: &str, from: &str, to: &str, what: &str) -> Result<String> {
    match text.matches(from).count() {
        1 => Ok(text.replacen(from, to, 1)),
        n => Err(format!("web/index.html: expected {what} once, found it {n} times")),
    }
}

/// `'sha256-…'` source expression for an inline block (CSP Level 2).
pub fn csp_hash(content: &str) -> String {
    format!("'sha256-{}'", base64(&Sha256::digest(content.as_bytes())))
}

/// Standard base64 with padding (RFC 4648 §4).
pub fn base64(bytes: &[u8]) -> String {
    const ALPHABET: &[u8; 64] = b"ABCDEFGHIJKLMNOPQRSTUVWXYZabcdefghijklmnopqrstuvwxyz0123456789+/";
    let mut out = String::with_capacity(bytes.len().div_ceil(3) * 4);
    for chunk in bytes.chunks(3) {
        let b = [chunk[0], *chunk.get(1).unwrap_or(&0), *chunk.get(2).unwrap_or(&0)];
        let n = (u32::from(b[0]) << 16) | (u32::from(b[1]) << 8) | u32::from(b[2]);
        for (i, shift) in [18, 12, 6, 0].into_iter().enumerate() {
            if i <= chunk.len() {
                out.push(ALPHABET[(n >> shift) as usize & 63] as char);
            } else {
                out.push('=');
            }
        }
    }
    out
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn base64_matches_rfc_4648_test_vectors() {
        // RFC 4648 §10 test vectors.
        for (input, expected) in [
            ("", ""),
            ("f", "Zg=="),
            ("fo", "Zm8="),
            ("foo", "Zm9v"),
            ("foob", "Zm9vYg=="),
            ("fooba", "Zm9vYmE="),
            ("foobar", "Zm9vYmFy"),
        ] {
            assert_eq!(base64(input.as_bytes()), expected, "{input}");
        }
    }

    #[test]
    fn csp_hash_of_known_text() {
        // SHA-256("abc") from FIPS 180-2 appendix B.1, base64 of its 32 bytes.
        assert_eq!(csp_hash("abc"), "'sha256-ungWv48Bz+pBQUDeXa4iI7ADYaOWF3qctBD/YfIAFa0='");
    }
}
