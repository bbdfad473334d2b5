//! Oversized frames before authentication (issue 13): a peer that completes the 64-byte ZMTP
//! greeting and then announces a frame far beyond the bound is disconnected, and the socket
//! goes on serving a well-behaved peer. Without the patch in `vendor/zeromq` the first case
//! makes the decoder reserve 2^40 bytes and the process aborts, so this test would not finish.

use kernel::channels::bounded;
use kernel::{DEFAULT_MAX_MESSAGE_BYTES, Limits};
use std::io::Write;
use std::time::Duration;
use zeromq::{
    DealerSocket, PubSocket, RepSocket, ReqSocket, RouterSocket, Socket, SocketRecv, SocketSend,
    SubSocket, ZmqMessage,
};

/// The ZMTP 3.0 greeting of a client with the NULL mechanism (RFC 23/ZMTP, section "Greeting").
fn greeting() -> Vec<u8> {
    let mut g = vec![0xff, 0, 0, 0, 0, 0, 0, 0, 1, 0x7f, 3, 0];
    let mut mech = b"NULL".to_vec();
    mech.resize(20, 0);
    g.extend(mech);
    g.push(0); // as-server
    g.resize(64, 0);
    g
}

/// Connects to `endpoint`, sends the greeting and a long-frame header declaring `len` bytes.
fn hostile(port: u16, len: u64) {
    let mut s = std::net::TcpStream::connect(("127.0.0.1", port)).expect("connect");
    s.set_write_timeout(Some(Duration::from_secs(2))).ok();
    let _ = s.write_all(&greeting());
    let mut header = vec![0x02u8]; // a long message frame
    header.extend(len.to_be_bytes());
    let _ = s.write_all(&header);
    let _ = s.flush();
    // Give the socket time to read and refuse it.
    std::thread::sleep(Duration::from_millis(200));
}

fn port_of(ep: &zeromq::Endpoint) -> u16 {
    match ep {
        zeromq::Endpoint::Tcp(_, p) => *p,
        other => panic!("not tcp: {other}"),
    }
}

const LENGTHS: [u64; 3] = [1 << 40, u64::MAX, DEFAULT_MAX_MESSAGE_BYTES as u64 + 1];

#[tokio::test(flavor = "multi_thread", worker_threads = 2)]
async fn router_refuses_oversized_frames_and_keeps_serving() {
    let mut router: RouterSocket = bounded(Limits::default());
    let ep = router.bind("tcp://127.0.0.1:0").await.unwrap();
    let port = port_of(&ep);
    for len in LENGTHS {
        tokio::task::spawn_blocking(move || hostile(port, len))
            .await
            .unwrap();
    }
    let mut dealer = DealerSocket::new();
    dealer
        .connect(&format!("tcp://127.0.0.1:{port}"))
        .await
        .unwrap();
    dealer.send(ZmqMessage::from("hello")).await.unwrap();
    let m = tokio::time::timeout(Duration::from_secs(5), router.recv())
        .await
        .expect("the router still answers")
        .unwrap();
    assert_eq!(m.get(1).map(|b| b.to_vec()), Some(b"hello".to_vec()));
}

#[tokio::test(flavor = "multi_thread", worker_threads = 2)]
async fn rep_refuses_oversized_frames_and_keeps_serving() {
    let mut rep: RepSocket = bounded(Limits::default());
    let ep = rep.bind("tcp://127.0.0.1:0").await.unwrap();
    let port = port_of(&ep);
    let server = tokio::spawn(async move {
        // The heartbeat loop of the kernel: errors from refused peers are logged and skipped.
        loop {
            match rep.recv().await {
                Ok(m) => {
                    rep.send(m).await.unwrap();
                    return;
                }
                Err(_) => continue,
            }
        }
    });
    for len in LENGTHS {
        tokio::task::spawn_blocking(move || hostile(port, len))
            .await
            .unwrap();
    }
    let mut req = ReqSocket::new();
    req.connect(&format!("tcp://127.0.0.1:{port}"))
        .await
        .unwrap();
    req.send(ZmqMessage::from("ping")).await.unwrap();
    let m = tokio::time::timeout(Duration::from_secs(5), req.recv())
        .await
        .expect("the heartbeat still echoes")
        .unwrap();
    assert_eq!(m.get(0).map(|b| b.to_vec()), Some(b"ping".to_vec()));
    server.await.unwrap();
}

#[tokio::test(flavor = "multi_thread", worker_threads = 2)]
async fn pub_refuses_oversized_frames_and_keeps_publishing() {
    let mut publisher: PubSocket = bounded(Limits::default());
    let ep = publisher.bind("tcp://127.0.0.1:0").await.unwrap();
    let port = port_of(&ep);
    for len in LENGTHS {
        tokio::task::spawn_blocking(move || hostile(port, len))
            .await
            .unwrap();
    }
    let mut sub = SubSocket::new();
    sub.connect(&format!("tcp://127.0.0.1:{port}"))
        .await
        .unwrap();
    sub.subscribe("").await.unwrap();
    let got = tokio::time::timeout(Duration::from_secs(5), async {
        loop {
            publisher.send(ZmqMessage::from("status")).await.unwrap();
            if let Ok(Ok(m)) = tokio::time::timeout(Duration::from_millis(100), sub.recv()).await {
                return m;
            }
        }
    })
    .await
    .expect("the publisher still publishes");
    assert_eq!(got.get(0).map(|b| b.to_vec()), Some(b"status".to_vec()));
}

#[tokio::test(flavor = "multi_thread", worker_threads = 2)]
async fn a_message_within_the_bound_is_delivered_and_one_beyond_it_is_not() {
    let limits = Limits {
        max_message_bytes: 4096,
    };
    let mut router: RouterSocket = bounded(limits);
    let ep = router.bind("tcp://127.0.0.1:0").await.unwrap();
    let port = port_of(&ep);
    let mut big = DealerSocket::new();
    big.connect(&format!("tcp://127.0.0.1:{port}"))
        .await
        .unwrap();
    big.send(ZmqMessage::from(vec![7u8; 8192])).await.unwrap();
    let mut small = DealerSocket::new();
    small
        .connect(&format!("tcp://127.0.0.1:{port}"))
        .await
        .unwrap();
    small.send(ZmqMessage::from(vec![1u8; 1000])).await.unwrap();
    let m = tokio::time::timeout(Duration::from_secs(5), router.recv())
        .await
        .expect("the small message arrives")
        .unwrap();
    assert_eq!(m.get(1).map(|b| b.len()), Some(1000));
    // Nothing else arrives: the 8 KiB message was refused.
    assert!(
        tokio::time::timeout(Duration::from_millis(500), router.recv())
            .await
            .is_err()
    );
}
