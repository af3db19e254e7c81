//! `cargo xtask serve [--port P]`: builds the browser bundle and serves `web/`
//! on `127.0.0.1` with the right MIME types and the page's
//! Content-Security-Policy as a header.
//!
//! A deliberately small HTTP/1.1 server (GET and HEAD, one request per
//! connection) for development and for the end-to-end tests; any static host
//! serves `dist/site/` in production.

use crate::{browser_bundle, workspace_root, Result, USAGE};
use std::io::{BufRead, BufReader, Write};
use std::net::{TcpListener, TcpStream};
use std::path::{Component, Path, PathBuf};

const DEFAULT_PORT: u16 = 8000;

pub fn run(args: &[String]) -> Result<()> {
    let mut port = DEFAULT_PORT;
    let mut build = true;
    let mut rest = args.iter();
    while let Some(arg) = rest.next() {
        match arg.as_str() {
            "--port" => {
                let value = rest.next().ok_or("--port needs a number, e.g. --port 8080")?;
                port = value.parse().map_err(|_| format!("--port '{value}' is not a port number (0-65535)"))?;
            }
            // Used by the end-to-end tests when the bundle is already built.
            "--no-build" => build = false,
            other => return Err(format!("'serve' takes no argument '{other}'\n\n{USAGE}")),
        }
    }
    let web = workspace_root().join("web");
    if build {
        browser_bundle::build(&browser_bundle::web_pkg_dir())?;
    }
    let server = Server::bind(&web, port)?;
    println!("orbitspan: serving {} at {}", web.display(), server.url());
    println!("orbitspan: open that address in a browser; press Ctrl+C to stop");
    server.serve_forever();
    Ok(())
}

/// A static file server for one folder.
pub struct Server {
    listener: TcpListener,
    root: PathBuf,
    policy: String,
}

impl Server {
    /// Binds `127.0.0.1:port` (0 picks a free port) to serve `root`, whose
    /// `index.html` carries the Content-Security-Policy sent as a header.
    pub fn bind(root: &Path, port: u16) -> Result<Server> {
        let index = root.join("index.html");
        let html = std::fs::read_to_string(&index).map_err(|e| format!("{}: cannot read: {e}", index.display()))?;
        let policy = page_policy(&html).ok_or_else(|| {
            format!("{}: no <meta http-equiv=\"Content-Security-Policy\" content=\"...\">", index.display())
        })?;
        let listener = TcpListener::bind(("127.0.0.1", port)).map_err(|e| {
            format!("cannot listen on 127.0.0.1:{port}: {e}; choose another port with --port")
        })?;
        // The header also forbids framing, which a <meta> policy cannot say.
        let policy = format!("{policy}; frame-ancestors 'none'");
        Ok(Server { listener, root: root.to_path_buf(), policy })
    }

    /// `http://127.0.0.1:PORT/`.
    pub fn url(&self) -> String {
        let port = self.listener.local_addr().map(|a| a.port()).unwrap_or(0);
        format!("http://127.0.0.1:{port}/")
    }

    /// Serves until the process ends, one thread per connection.
    pub fn serve_forever(self) {
        let shared = std::sync::Arc::new((self.root, self.policy));
        for stream in self.listener.incoming().flatten() {
            let shared = shared.clone();
            std::thread::spawn(move || {
                let (root, policy) = &*shared;
                if let Err(e) = respond(stream, root, policy) {
                    eprintln!("serve: {e}");
                }
            });
        }
    }
}

/// The `content` of the page's `<meta http-equiv="Content-Security-Policy">`.
pub fn page_policy(html: &str) -> Option<String> {
    let start = html.find("http-equiv=\"Content-Security-Policy\"")?;
    let tag_end = start + html[start..].find('>')?;
    let tag = &html[start..tag_end];
    let content = tag.find("content=\"")? + "content=\"".len();
    let len = tag[content..].find('"')?;
    Some(tag[content..content + len].to_string())
}

/// The MIME type for a file name, by extension.
pub fn mime_type(path: &Path) -> &'static str {
    match path.extension().and_then(|e| e.to_str()).unwrap_or("") {
        "html" => "text/html; charset=utf-8",
        "js" | "mjs" => "text/javascript; charset=utf-8",
        "css" => "text/css; charset=utf-8",
        "wasm" => "application/wasm",
        "json" => "application/json",
        "svg" => "image/svg+xml",
        "png" => "image/png",
        "ico" => "image/x-icon",
        "txt" | "md" => "text/plain; charset=utf-8",
        _ => "application/octet-stream",
    }
}

/// Maps a request target (`/views/stack.js?x`) to a file under `root`, or
/// `None` for anything that would leave it.
pub fn resolve(root: &Path, target: &str) -> Option<PathBuf> {
    let path = target.split(['?', '#']).next().unwrap_or("");
    let path = percent_decode(path)?;
    let relative = path.strip_prefix('/')?;
    let mut out = root.to_path_buf();
    for component in Path::new(relative).components() {
        match component {
            Component::Normal(part) => out.push(part),
            _ => return None,
        }
    }
    if out.is_dir() {
        out.push("index.html");
    }
    Some(out)
}

fn percent_decode(text: &str) -> Option<String> {
    let bytes = text.as_bytes();
    let mut out = Vec::with_capacity(bytes.len());
    let mut i = 0;
    while i < bytes.len() {
        if bytes[i] == b'%' {
            let hex = std::str::from_utf8(bytes.get(i + 1..i + 3)?).ok()?;
            out.push(u8::from_str_radix(hex, 16).ok()?);
            i += 3;
        } else {
            out.push(bytes[i]);
            i += 1;
        }
    }
    String::from_utf8(out).ok()
}

fn respond(stream: TcpStream, root: &Path, policy: &str) -> std::io::Result<()> {
    let mut reader = BufReader::new(stream.try_clone()?);
    let mut request_line = String::new();
    reader.read_line(&mut request_line)?;
    // Read and ignore the headers.
    loop {
        let mut line = String::new();
        if reader.read_line(&mut line)? == 0 || line == "\r\n" || line == "\n" {
            break;
        }
    }
    let mut parts = request_line.split_whitespace();
    let (method, target) = (parts.next().unwrap_or(""), parts.next().unwrap_or(""));
    let mut stream = stream;
    if method != "GET" && method != "HEAD" {
        return write_response(&mut stream, "405 Method Not Allowed", "text/plain; charset=utf-8", policy, b"only GET and HEAD\n", true);
    }
    let file = resolve(root, target).filter(|p| p.is_file());
    let Some(file) = file else {
        return write_response(&mut stream, "404 Not Found", "text/plain; charset=utf-8", policy, b"not found\n", method == "GET");
    };
    let body = std::fs::read(&file)?;
    write_response(&mut stream, "200 OK", mime_type(&file), policy, &body, method == "GET")
}

fn write_response(
    stream: &mut TcpStream,
    status: &str,
    mime: &str,
    policy: &str,
    body: &[u8],
    with_body: bool,
) -> std::io::Result<()> {
    let head = format!(
        "HTTP/1.1 {status}\r\nContent-Type: {mime}\r\nContent-Length: {}\r\n\
         Content-Security-Policy: {policy}\r\nX-Content-Type-Options: nosniff\r\n\
         Referrer-Policy: no-referrer\r\nCache-Control: no-cache\r\nConnection: close\r\n\r\n",
        body.len()
    );
    stream.write_all(head.as_bytes())?;
    if with_body {
        stream.write_all(body)?;
    }
    stream.flush()
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn mime_types_of_the_page_files() {
        assert_eq!(mime_type(Path::new("pkg/orbitspan_wasm_bg.wasm")), "application/wasm");
        assert_eq!(mime_type(Path::new("views/stack.js")), "text/javascript; charset=utf-8");
        assert_eq!(mime_type(Path::new("style.css")), "text/css; charset=utf-8");
        assert_eq!(mime_type(Path::new("index.html")), "text/html; charset=utf-8");
        assert_eq!(mime_type(Path::new("LICENSE")), "application/octet-stream");
    }

    #[test]
    fn requests_cannot_leave_the_root() {
        let root = Path::new("/srv/web");
        assert_eq!(resolve(root, "/views/a.js?v=1"), Some(PathBuf::from("/srv/web/views/a.js")));
        assert_eq!(resolve(root, "/a%20b.js"), Some(PathBuf::from("/srv/web/a b.js")));
        assert_eq!(resolve(root, "/../etc/passwd"), None);
        assert_eq!(resolve(root, "/%2e%2e/etc/passwd"), None);
        assert_eq!(resolve(root, "relative.js"), None);
        assert_eq!(resolve(root, "/%zz"), None);
    }

    #[test]
    fn policy_is_read_from_the_meta_tag() {
        let html = r#"<head><meta charset="utf-8"><meta http-equiv="Content-Security-Policy" content="default-src 'none'; script-src 'self'"></head>"#;
        assert_eq!(page_policy(html).as_deref(), Some("default-src 'none'; script-src 'self'"));
        assert_eq!(page_policy("<head></head>"), None);
    }

    #[test]
    fn serves_files_with_type_and_policy_headers() {
        let dir = std::env::temp_dir().join(format!("xtask-serve-test-{}", std::process::id()));
        std::fs::create_dir_all(&dir).unwrap();
        std::fs::write(
            dir.join("index.html"),
            r#"<meta http-equiv="Content-Security-Policy" content="default-src 'self'">hello"#,
        )
        .unwrap();
        std::fs::write(dir.join("m.wasm"), [0u8, 97, 115, 109]).unwrap();
        let server = Server::bind(&dir, 0).unwrap();
        let url = server.url();
        std::thread::spawn(move || server.serve_forever());
        let port: u16 = url.trim_end_matches('/').rsplit(':').next().unwrap().parse().unwrap();
        let get = |path: &str| {
            use std::io::Read;
            let mut s = TcpStream::connect(("127.0.0.1", port)).unwrap();
            write!(s, "GET {path} HTTP/1.1\r\nHost: x\r\n\r\n").unwrap();
            let mut out = Vec::new();
            s.read_to_end(&mut out).unwrap();
            out
        };
        let wasm = get("/m.wasm");
        let text = String::from_utf8_lossy(&wasm);
        assert!(text.starts_with("HTTP/1.1 200 OK"), "{text}");
        assert!(text.contains("Content-Type: application/wasm\r\n"), "{text}");
        assert!(text.contains("Content-Security-Policy: default-src 'self'; frame-ancestors 'none'\r\n"), "{text}");
        assert!(wasm.ends_with(&[0, 97, 115, 109]));
        let index = String::from_utf8(get("/")).unwrap();
        assert!(index.contains("text/html") && index.ends_with("hello"), "{index}");
        assert!(String::from_utf8(get("/missing.js")).unwrap().starts_with("HTTP/1.1 404"));
        std::fs::remove_dir_all(&dir).unwrap();
    }
}
