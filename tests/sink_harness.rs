//! Checks of the shared test harness itself (`tests/common`): the servers
//! start, stop and restart on their ports, and the tiny HTTP client decodes
//! what real servers send.

mod common;

use std::io::{Read, Write};
use std::net::TcpStream;

use common::{http, Mosquitto, VictoriaMetrics};

/// Sends an MQTT 3.1.1 CONNECT (clean session, client id "h") and returns
/// the CONNACK's return code (0 = accepted).
fn mqtt_connect(port: u16) -> std::io::Result<u8> {
    let mut s = TcpStream::connect(("127.0.0.1", port))?;
    let connect = [
        0x10, 13, // CONNECT, remaining length
        0, 4, b'M', b'Q', b'T', b'T', 4, // protocol name, level 4 (3.1.1)
        0x02, 0, 60, // clean session, keep-alive 60 s
        0, 1, b'h', // client id
    ];
    s.write_all(&connect)?;
    let mut connack = [0u8; 4];
    s.read_exact(&mut connack)?;
    assert_eq!(connack[..2], [0x20, 2], "not a CONNACK: {connack:?}");
    Ok(connack[3])
}

#[test]
fn mosquitto_starts_stops_and_restarts_on_its_port() {
    let mut broker = Mosquitto::start();
    assert_eq!(mqtt_connect(broker.port).unwrap(), 0);
    broker.stop();
    assert!(!broker.is_running());
    assert!(TcpStream::connect(("127.0.0.1", broker.port)).is_err());
    broker.restart();
    assert_eq!(mqtt_connect(broker.port).unwrap(), 0, "{}", broker.log());

    let mut persistent = Mosquitto::start_persistent();
    persistent.restart();
    assert_eq!(mqtt_connect(persistent.port).unwrap(), 0, "{}", persistent.log());
}

#[test]
fn victoria_metrics_keeps_its_data_across_stop_and_start() {
    let mut vm = VictoriaMetrics::start();
    let r = http::post(vm.port, "/api/v2/write?precision=ns", b"h v=1 1700000000000000000").unwrap();
    assert_eq!(r.status, 204, "{}", r.text());
    vm.stop();
    assert!(!vm.is_running());
    assert!(http::get(vm.port, "/health").is_err());
    vm.start_again();
    let got = vm.export("h_v");
    assert_eq!(got.len(), 1);
    assert_eq!(got[0].samples(), vec![(1_700_000_000_000, 1.0)]);
    let q = vm.query("h_v", 1_700_000_000.0);
    assert_eq!(q["status"], "success");
}

#[test]
fn chunked_bodies_are_decoded() {
    let raw = b"HTTP/1.1 200 OK\r\nTransfer-Encoding: chunked\r\n\r\n\
                5\r\nhello\r\n7;ext=1\r\n, world\r\n0\r\n\r\n";
    let r = http::parse_response(raw).unwrap();
    assert_eq!((r.status, r.text().as_str()), (200, "hello, world"));
    let raw = b"HTTP/1.1 204 No Content\r\nContent-Length: 0\r\n\r\n";
    assert!(http::parse_response(raw).unwrap().body.is_empty());
    assert!(http::decode_chunked(b"5\r\nhel").is_err());
    assert_eq!(http::encode(r#"{a="b c"}"#), "%7Ba%3D%22b%20c%22%7D");
}

#[test]
fn the_built_binary_is_found() {
    assert!(common::workspace_bin().is_file());
}
