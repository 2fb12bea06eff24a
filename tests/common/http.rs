//! A tiny blocking HTTP/1.1 client for talking to test servers.
//!
//! One request per connection (`Connection: close`), the response read to
//! end of stream, the body decoded from `Content-Length` or chunked
//! transfer encoding. Enough for health checks, exports and queries against
//! servers on loopback, without adding an HTTP crate to the tests.

use std::io::{self, Read, Write};
use std::net::TcpStream;
use std::time::Duration;

/// Guard against a server that accepts and then never answers: the test
/// fails with an I/O error instead of hanging forever. Generous on purpose;
/// it is a hang detector, not a performance limit.
const IO_GUARD: Duration = Duration::from_secs(120);

/// Status and decoded body of an answer.
#[derive(Debug, Clone)]
pub struct Response {
    /// HTTP status code.
    pub status: u16,
    /// Body after transfer decoding.
    pub body: Vec<u8>,
}

impl Response {
    /// The body as (lossy) UTF-8.
    pub fn text(&self) -> String {
        String::from_utf8_lossy(&self.body).into_owned()
    }
}

/// `GET target` (path and query, already encoded) on 127.0.0.1:`port`.
pub fn get(port: u16, target: &str) -> io::Result<Response> {
    request(port, "GET", target, &[], &[])
}

/// `POST target` with `body` on 127.0.0.1:`port`.
pub fn post(port: u16, target: &str, body: &[u8]) -> io::Result<Response> {
    request(port, "POST", target, &[], body)
}

/// One request with extra `headers`; the connection is closed afterwards.
pub fn request(port: u16, method: &str, target: &str, headers: &[(&str, &str)], body: &[u8]) -> io::Result<Response> {
    let mut stream = TcpStream::connect(("127.0.0.1", port))?;
    stream.set_read_timeout(Some(IO_GUARD))?;
    stream.set_write_timeout(Some(IO_GUARD))?;
    let mut head = format!(
        "{method} {target} HTTP/1.1\r\nHost: 127.0.0.1:{port}\r\nConnection: close\r\n\
         Accept-Encoding: identity\r\nContent-Length: {}\r\n",
        body.len()
    );
    for (k, v) in headers {
        head.push_str(&format!("{k}: {v}\r\n"));
    }
    head.push_str("\r\n");
    stream.write_all(head.as_bytes())?;
    stream.write_all(body)?;
    stream.flush()?;
    let mut raw = Vec::new();
    stream.read_to_end(&mut raw)?;
    parse_response(&raw)
}

/// Splits a complete HTTP/1.1 response into status and decoded body.
pub fn parse_response(raw: &[u8]) -> io::Result<Response> {
    let bad = |m: &str| io::Error::new(io::ErrorKind::InvalidData, m.to_string());
    let split = find(raw, b"\r\n\r\n").ok_or_else(|| bad("no end of headers"))?;
    let head = std::str::from_utf8(&raw[..split]).map_err(|_| bad("headers not UTF-8"))?;
    let rest = &raw[split + 4..];
    let mut lines = head.split("\r\n");
    let status_line = lines.next().unwrap_or_default();
    let status = status_line
        .split_whitespace()
        .nth(1)
        .and_then(|s| s.parse::<u16>().ok())
        .ok_or_else(|| bad(&format!("bad status line {status_line:?}")))?;
    let mut chunked = false;
    let mut length = None;
    for line in lines {
        let Some((k, v)) = line.split_once(':') else {
            continue;
        };
        let (k, v) = (k.trim().to_ascii_lowercase(), v.trim());
        if k == "transfer-encoding" && v.to_ascii_lowercase().contains("chunked") {
            chunked = true;
        } else if k == "content-length" {
            length = v.parse::<usize>().ok();
        }
    }
    let body = if chunked {
        decode_chunked(rest)?
    } else if let Some(n) = length {
        if rest.len() < n {
            return Err(bad("body shorter than Content-Length"));
        }
        rest[..n].to_vec()
    } else {
        rest.to_vec()
    };
    Ok(Response { status, body })
}

/// Decodes a chunked transfer-encoded body (RFC 9112 §7.1); chunk
/// extensions and trailers are ignored.
pub fn decode_chunked(mut data: &[u8]) -> io::Result<Vec<u8>> {
    let bad = |m: &str| io::Error::new(io::ErrorKind::InvalidData, m.to_string());
    let mut out = Vec::new();
    loop {
        let eol = find(data, b"\r\n").ok_or_else(|| bad("chunk size line not terminated"))?;
        let line = std::str::from_utf8(&data[..eol]).map_err(|_| bad("chunk size not UTF-8"))?;
        let size_hex = line.split(';').next().unwrap_or_default().trim();
        let size = usize::from_str_radix(size_hex, 16).map_err(|_| bad(&format!("bad chunk size {size_hex:?}")))?;
        data = &data[eol + 2..];
        if size == 0 {
            return Ok(out);
        }
        if data.len() < size + 2 || &data[size..size + 2] != b"\r\n" {
            return Err(bad("chunk shorter than its size"));
        }
        out.extend_from_slice(&data[..size]);
        data = &data[size + 2..];
    }
}

/// Percent-encodes `s` for use as one query-string value.
pub fn encode(s: &str) -> String {
    let mut out = String::with_capacity(s.len());
    for b in s.bytes() {
        match b {
            b'A'..=b'Z' | b'a'..=b'z' | b'0'..=b'9' | b'-' | b'_' | b'.' | b'~' => out.push(b as char),
            _ => out.push_str(&format!("%{b:02X}")),
        }
    }
    out
}

fn find(hay: &[u8], needle: &[u8]) -> Option<usize> {
    hay.windows(needle.len()).position(|w| w == needle)
}
