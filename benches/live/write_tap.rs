//! A counting relay in front of the time-series database, for the live
//! benchmark's write-volume part: the service writes to the relay, the
//! relay passes every request on to the real database (VictoriaMetrics)
//! unchanged and hands the database's answer back, and on the way it
//! counts what the service sent to `/api/v2/write`: requests, answers in
//! the 2xx range, line-protocol lines and their bytes, per measurement.
//!
//! The counts are of the request bodies as sent (after undoing a gzip
//! `Content-Encoding`, if any), so a batch the service sends twice (a
//! retry) is counted twice: it is the traffic, not the distinct points.
//!
//! HTTP/1.1 with keep-alive towards the service (the influxdb2 client
//! pools its connections); one connection per request towards the
//! database, with `Connection: close`. Request bodies with
//! `Content-Length` or chunked encoding are understood, which is all an
//! HTTP client sends. Loopback only; every read has a timeout, and the
//! accept loop ends when the tap is dropped.

use std::collections::BTreeMap;
use std::io::{self, Read, Write};
use std::net::{TcpListener, TcpStream};
use std::sync::atomic::{AtomicBool, Ordering};
use std::sync::{Arc, Mutex};
use std::time::Duration;

/// How long a relay thread waits for the next request on an idle
/// keep-alive connection (longer than the client pool's 90 s idle time,
/// so the client closes first), and for the database's answer.
const IDLE: Duration = Duration::from_secs(120);
/// Largest request head taken (the service sends a few hundred bytes).
const MAX_HEAD: usize = 64 * 1024;

/// What the service wrote, counted at the relay.
#[derive(Debug, Clone, Default)]
pub struct WriteTally {
    /// Write requests (`/api/v2/write`) relayed.
    pub requests: u64,
    /// Of them, answered 2xx by the database (each lets the service
    /// remove its batch from the outbox: one more ledger transaction).
    pub accepted: u64,
    /// Line-protocol lines in the request bodies.
    pub lines: u64,
    /// Their bytes, without the newlines.
    pub bytes: u64,
    /// Lines and bytes per measurement.
    pub by_measurement: BTreeMap<String, (u64, u64)>,
}

impl WriteTally {
    /// `self - earlier`, for the counts of a time window.
    pub fn since(&self, earlier: &WriteTally) -> WriteTally {
        let mut by = BTreeMap::new();
        for (m, (l, b)) in &self.by_measurement {
            let (l0, b0) = earlier.by_measurement.get(m).copied().unwrap_or_default();
            if l - l0 > 0 {
                by.insert(m.clone(), (l - l0, b - b0));
            }
        }
        WriteTally {
            requests: self.requests - earlier.requests,
            accepted: self.accepted - earlier.accepted,
            lines: self.lines - earlier.lines,
            bytes: self.bytes - earlier.bytes,
            by_measurement: by,
        }
    }

    fn count(&mut self, body: &[u8]) {
        self.requests += 1;
        for line in body.split(|&b| b == b'\n') {
            let line = line.strip_suffix(b"\r").unwrap_or(line);
            if line.is_empty() || line.starts_with(b"#") {
                continue;
            }
            let e = self.by_measurement.entry(measurement(line)).or_default();
            e.0 += 1;
            e.1 += line.len() as u64;
            self.lines += 1;
            self.bytes += line.len() as u64;
        }
    }
}

/// The measurement of a line: up to the first unescaped comma or space.
fn measurement(line: &[u8]) -> String {
    let mut end = line.len();
    let mut escaped = false;
    for (i, &b) in line.iter().enumerate() {
        if escaped {
            escaped = false;
        } else if b == b'\\' {
            escaped = true;
        } else if b == b',' || b == b' ' {
            end = i;
            break;
        }
    }
    String::from_utf8_lossy(&line[..end]).into_owned()
}

/// A running relay; the accept loop stops when it is dropped.
pub struct WriteTap {
    /// Port on 127.0.0.1 to give the service as its database.
    pub port: u16,
    tally: Arc<Mutex<WriteTally>>,
    stop: Arc<AtomicBool>,
}

impl WriteTap {
    /// Listens on a free loopback port and relays to 127.0.0.1:`upstream`.
    pub fn start(upstream: u16) -> WriteTap {
        let listener = TcpListener::bind("127.0.0.1:0").expect("bind the write tap on 127.0.0.1");
        listener.set_nonblocking(true).expect("non-blocking accept");
        let port = listener.local_addr().expect("the tap's address").port();
        let tally = Arc::new(Mutex::new(WriteTally::default()));
        let stop = Arc::new(AtomicBool::new(false));
        let (t, s) = (tally.clone(), stop.clone());
        std::thread::spawn(move || {
            while !s.load(Ordering::Relaxed) {
                match listener.accept() {
                    Ok((conn, _)) => {
                        let t = t.clone();
                        std::thread::spawn(move || {
                            if let Err(e) = relay(conn, upstream, &t) {
                                if e.kind() != io::ErrorKind::UnexpectedEof && e.kind() != io::ErrorKind::WouldBlock {
                                    eprintln!("     write tap: connection ended: {e}");
                                }
                            }
                        });
                    }
                    Err(e) if e.kind() == io::ErrorKind::WouldBlock => std::thread::sleep(Duration::from_millis(5)),
                    Err(e) => {
                        eprintln!("     write tap: accept failed, no more connections: {e}");
                        break;
                    }
                }
            }
        });
        WriteTap { port, tally, stop }
    }

    /// `http://127.0.0.1:PORT`, the database URL for the service.
    pub fn url(&self) -> String {
        format!("http://127.0.0.1:{}", self.port)
    }

    /// The counts so far.
    pub fn tally(&self) -> WriteTally {
        self.tally.lock().unwrap().clone()
    }
}

impl Drop for WriteTap {
    fn drop(&mut self) {
        self.stop.store(true, Ordering::Relaxed);
    }
}

/// One request as read from the service.
struct Request {
    /// Request line and headers, without the final empty line.
    head: Vec<String>,
    /// The body as sent (still content-encoded).
    body: Vec<u8>,
    gzip: bool,
    close: bool,
}

/// Serves one client connection until it closes or idles out.
fn relay(mut client: TcpStream, upstream: u16, tally: &Mutex<WriteTally>) -> io::Result<()> {
    client.set_nonblocking(false)?;
    client.set_read_timeout(Some(IDLE))?;
    client.set_write_timeout(Some(IDLE))?;
    let mut pending = Vec::new();
    while let Some(req) = read_request(&mut client, &mut pending)? {
        let is_write = req.head[0].split_whitespace().nth(1).is_some_and(|t| t.starts_with("/api/v2/write"));
        let (status, answer) = forward(&req, upstream)?;
        if is_write {
            let body = if req.gzip {
                let mut out = Vec::new();
                flate2::read::GzDecoder::new(&req.body[..]).read_to_end(&mut out)?;
                out
            } else {
                req.body.clone()
            };
            let mut t = tally.lock().unwrap();
            t.count(&body);
            if (200..300).contains(&status) {
                t.accepted += 1;
            }
        }
        client.write_all(&answer)?;
        client.flush()?;
        if req.close {
            break;
        }
    }
    Ok(())
}

/// Reads the next request; `None` when the client closed between requests.
fn read_request(s: &mut TcpStream, buf: &mut Vec<u8>) -> io::Result<Option<Request>> {
    let bad = |m: &str| io::Error::new(io::ErrorKind::InvalidData, m.to_string());
    let mut chunk = [0u8; 16 * 1024];
    let end = loop {
        if let Some(i) = find(buf, b"\r\n\r\n") {
            break i;
        }
        if buf.len() > MAX_HEAD {
            return Err(bad("request head too long"));
        }
        let n = s.read(&mut chunk)?;
        if n == 0 {
            return if buf.is_empty() { Ok(None) } else { Err(bad("connection closed inside a request head")) };
        }
        buf.extend_from_slice(&chunk[..n]);
    };
    let head: Vec<String> = String::from_utf8_lossy(&buf[..end]).split("\r\n").map(str::to_string).collect::<Vec<_>>();
    buf.drain(..end + 4);
    let header = |name: &str| {
        head[1..].iter().find_map(|l| {
            let (k, v) = l.split_once(':')?;
            k.trim().eq_ignore_ascii_case(name).then(|| v.trim().to_ascii_lowercase())
        })
    };
    let body = if header("transfer-encoding").is_some_and(|v| v.contains("chunked")) {
        // Read up to the last chunk, then decode.
        loop {
            if let Some(i) = find(buf, b"0\r\n\r\n") {
                if i == 0 || buf[..i].ends_with(b"\r\n") {
                    let raw: Vec<u8> = buf.drain(..i + 5).collect();
                    break chunked(&raw)?;
                }
            }
            let n = s.read(&mut chunk)?;
            if n == 0 {
                return Err(bad("connection closed inside a chunked body"));
            }
            buf.extend_from_slice(&chunk[..n]);
        }
    } else {
        let len: usize = header("content-length").and_then(|v| v.parse().ok()).unwrap_or(0);
        while buf.len() < len {
            let n = s.read(&mut chunk)?;
            if n == 0 {
                return Err(bad("connection closed inside a body"));
            }
            buf.extend_from_slice(&chunk[..n]);
        }
        buf.drain(..len).collect()
    };
    let gzip = header("content-encoding").is_some_and(|v| v.contains("gzip"));
    let close = header("connection").is_some_and(|v| v.contains("close"));
    Ok(Some(Request { head, body, gzip, close }))
}

/// Sends `req` to the database on a new connection; returns its status and
/// the answer to hand back (a body with `Content-Length`, the connection
/// kept open unless the client asked to close it).
fn forward(req: &Request, upstream: u16) -> io::Result<(u16, Vec<u8>)> {
    let mut db = TcpStream::connect(("127.0.0.1", upstream))?;
    db.set_read_timeout(Some(IDLE))?;
    db.set_write_timeout(Some(IDLE))?;
    let mut out = format!("{}\r\n", req.head[0]);
    for h in &req.head[1..] {
        let name = h.split(':').next().unwrap_or_default().trim().to_ascii_lowercase();
        if !matches!(name.as_str(), "connection" | "content-length" | "transfer-encoding" | "keep-alive") {
            out.push_str(h);
            out.push_str("\r\n");
        }
    }
    out.push_str(&format!("Content-Length: {}\r\nConnection: close\r\n\r\n", req.body.len()));
    db.write_all(out.as_bytes())?;
    db.write_all(&req.body)?;
    db.flush()?;
    let mut raw = Vec::new();
    db.read_to_end(&mut raw)?;
    let end = find(&raw, b"\r\n\r\n")
        .ok_or_else(|| io::Error::new(io::ErrorKind::InvalidData, "database answer without a head"))?;
    let head = String::from_utf8_lossy(&raw[..end]).into_owned();
    let mut lines = head.split("\r\n");
    let status_line = lines.next().unwrap_or_default().to_string();
    let status: u16 = status_line.split_whitespace().nth(1).and_then(|s| s.parse().ok()).unwrap_or(0);
    let mut chunked_body = false;
    let mut kept = vec![];
    for l in lines {
        let name = l.split(':').next().unwrap_or_default().trim().to_ascii_lowercase();
        match name.as_str() {
            "transfer-encoding" => chunked_body = l.to_ascii_lowercase().contains("chunked"),
            "connection" | "content-length" | "keep-alive" => {}
            _ => kept.push(l.to_string()),
        }
    }
    let rest = &raw[end + 4..];
    let body = if chunked_body { chunked(rest)? } else { rest.to_vec() };
    let mut answer = format!("{status_line}\r\n");
    for l in kept {
        answer.push_str(&l);
        answer.push_str("\r\n");
    }
    if status != 204 && status != 304 {
        answer.push_str(&format!("Content-Length: {}\r\n", body.len()));
    }
    if req.close {
        answer.push_str("Connection: close\r\n");
    }
    answer.push_str("\r\n");
    let mut bytes = answer.into_bytes();
    if status != 204 && status != 304 {
        bytes.extend_from_slice(&body);
    }
    Ok((status, bytes))
}

fn chunked(raw: &[u8]) -> io::Result<Vec<u8>> {
    crate::common::http::decode_chunked(raw)
}

fn find(hay: &[u8], needle: &[u8]) -> Option<usize> {
    hay.windows(needle.len()).position(|w| w == needle)
}
