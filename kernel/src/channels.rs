//! The sockets and their tasks.
//!
//! Each socket has one owner task (the zeromq crate's send and recv take `&mut self`); the
//! shell and control ROUTERs are split into a receiving task and a sending task fed by a
//! channel, and IOPub has one publisher task. Shell requests run one at a time on a plain
//! thread that owns the interpreter, so a long computation never starves the control and
//! heartbeat tasks. After the shutdown reply the process waits 100 ms before exiting, because
//! the zeromq crate has no linger and would drop the last messages.
//!
//! Every socket bounds what one inbound message may hold ([`Limits::max_message_bytes`],
//! through the patch kept in `vendor/zeromq`): a peer that announces more is disconnected
//! before anything is reserved, and the kernel keeps serving.

use crate::connection::ConnectionInfo;
use crate::dispatch::{Channel, Control, Dispatcher, Flow, Transport, decode_or_log, is_execute};
use crate::interp::Interpreter;
use crate::message::Replier;
use crate::watch::{Debounce, FileWatch, QUIET};
use crate::wire::{Message, Signer};
use bytes::Bytes;
use std::sync::Arc;
use std::sync::atomic::AtomicBool;
use tokio::sync::mpsc::{UnboundedSender, unbounded_channel};
use zeromq::{
    PubSocket, RepSocket, RouterSocket, Socket, SocketOptions, SocketRecv, SocketSend, ZmqMessage,
};

/// Bounds on what peers may send.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub struct Limits {
    /// The most bytes one inbound message (all its frames) may hold.
    pub max_message_bytes: usize,
}

/// The default bound on an inbound message: 256 MiB, far above any cell or reply.
pub const DEFAULT_MAX_MESSAGE_BYTES: usize = 256 << 20;

impl Default for Limits {
    fn default() -> Limits {
        Limits {
            max_message_bytes: DEFAULT_MAX_MESSAGE_BYTES,
        }
    }
}

/// A socket whose inbound messages are bounded by `limits`.
pub fn bounded<S: Socket>(limits: Limits) -> S {
    let mut o = SocketOptions::default();
    o.max_message_size(limits.max_message_bytes);
    S::with_options(o)
}

type Frames = Vec<Vec<u8>>;

/// The real transport: signs, then hands frames to the socket-owner tasks.
#[derive(Clone)]
pub struct SocketTransport {
    signer: Signer,
    shell: UnboundedSender<Frames>,
    control: UnboundedSender<Frames>,
    iopub: UnboundedSender<Frames>,
}

impl Transport for SocketTransport {
    fn send(&self, channel: Channel, m: Message) {
        let frames = self.signer.encode(&m);
        let tx = match channel {
            Channel::Shell => &self.shell,
            Channel::Control => &self.control,
            Channel::IoPub => &self.iopub,
        };
        if tx.send(frames).is_err() {
            eprintln!("partita: the {channel:?} socket task has stopped; a message was not sent");
        }
    }
}

fn to_zmq(frames: Frames) -> Option<ZmqMessage> {
    ZmqMessage::try_from(frames.into_iter().map(Bytes::from).collect::<Vec<_>>()).ok()
}

fn from_zmq(m: ZmqMessage) -> Frames {
    m.into_vec().into_iter().map(|b| b.to_vec()).collect()
}

/// Binds the five sockets and serves until a shutdown request.
pub fn serve(
    conn: ConnectionInfo,
    interp: Box<dyn Interpreter>,
    limits: Limits,
) -> Result<(), String> {
    let rt = tokio::runtime::Builder::new_multi_thread()
        .worker_threads(2)
        .enable_all()
        .build()
        .map_err(|e| format!("cannot start the runtime: {e}"))?;
    rt.block_on(run(conn, interp, limits))
}

async fn bind<S: Socket>(
    s: &mut S,
    conn: &ConnectionInfo,
    port: u16,
    name: &str,
) -> Result<(), String> {
    let ep = conn.endpoint(port);
    s.bind(&ep)
        .await
        .map(|_| ())
        .map_err(|e| format!("cannot bind the {name} socket to {ep}: {e}"))
}

/// The owner task of a socket's sending side: sends what arrives on `rx`, logging failures
/// (a ROUTER send to an identity that has gone is an error, not a reason to stop).
fn spawn_sender<S: SocketSend + Send + 'static>(
    mut socket: S,
    mut rx: tokio::sync::mpsc::UnboundedReceiver<Frames>,
    name: &'static str,
) {
    tokio::spawn(async move {
        while let Some(f) = rx.recv().await {
            if let Some(m) = to_zmq(f) {
                if let Err(e) = socket.send(m).await {
                    eprintln!("partita: {name} send failed: {e}");
                }
            }
        }
    });
}

async fn run(
    conn: ConnectionInfo,
    interp: Box<dyn Interpreter>,
    limits: Limits,
) -> Result<(), String> {
    let mut shell: RouterSocket = bounded(limits);
    let mut control: RouterSocket = bounded(limits);
    let mut stdin: RouterSocket = bounded(limits);
    let mut iopub: PubSocket = bounded(limits);
    let mut hb: RepSocket = bounded(limits);
    bind(&mut shell, &conn, conn.shell_port, "shell").await?;
    bind(&mut control, &conn, conn.control_port, "control").await?;
    bind(&mut stdin, &conn, conn.stdin_port, "stdin").await?;
    bind(&mut iopub, &conn, conn.iopub_port, "iopub").await?;
    bind(&mut hb, &conn, conn.hb_port, "heartbeat").await?;

    let signer = Signer::new(&conn.key);
    let (shell_tx, shell_rx) = unbounded_channel::<Frames>();
    let (control_tx, control_rx) = unbounded_channel::<Frames>();
    let (iopub_tx, iopub_rx) = unbounded_channel::<Frames>();
    let transport = SocketTransport {
        signer: signer.clone(),
        shell: shell_tx,
        control: control_tx,
        iopub: iopub_tx,
    };
    let (exit_tx, mut exit_rx) = unbounded_channel::<()>();

    let (shell_send, mut shell_recv) = shell.split();
    let (control_send, mut control_recv) = control.split();

    spawn_sender(shell_send, shell_rx, "shell");
    spawn_sender(control_send, control_rx, "control");
    spawn_sender(iopub, iopub_rx, "iopub");
    tokio::spawn(async move {
        loop {
            match hb.recv().await {
                Ok(m) => {
                    if let Err(e) = hb.send(m).await {
                        eprintln!("partita: heartbeat send failed: {e}");
                    }
                }
                Err(e) => {
                    eprintln!("partita: heartbeat receive failed: {e}");
                    tokio::time::sleep(std::time::Duration::from_millis(50)).await;
                }
            }
        }
    });
    tokio::spawn(async move {
        // Nothing is ever asked on stdin; keep the socket drained.
        while stdin.recv().await.is_ok() {}
    });

    let interrupt = Arc::new(AtomicBool::new(false));
    let replier = Replier::new();
    let dispatcher = Dispatcher::new(
        transport.clone(),
        interp,
        interrupt.clone(),
        replier.clone(),
    );
    let control_handler = Control::new(
        transport.clone(),
        dispatcher.info(),
        interrupt.clone(),
        replier,
    );

    // SIGINT interrupts the running cell, like an interrupt_request.
    {
        let interrupt = interrupt.clone();
        if let Ok(mut sig) =
            tokio::signal::unix::signal(tokio::signal::unix::SignalKind::interrupt())
        {
            tokio::spawn(async move {
                while sig.recv().await.is_some() {
                    interrupt.store(true, std::sync::atomic::Ordering::SeqCst);
                }
            });
        }
    }

    // Shell requests, one at a time, on a thread of their own; file changes arrive on the
    // same queue, so refreshes run between requests.
    let (work_tx, work_rx) = std::sync::mpsc::channel::<Work>();
    {
        let signer = signer.clone();
        let exit_tx = exit_tx.clone();
        let changes = work_tx.clone();
        std::thread::Builder::new()
            .name("partita-shell".into())
            .spawn(move || shell_loop(dispatcher, signer, work_rx, changes, exit_tx))
            .map_err(|e| format!("cannot start the shell thread: {e}"))?;
    }
    tokio::spawn(async move {
        loop {
            match shell_recv.recv().await {
                Ok(m) => {
                    if work_tx
                        .send(Work::Request(std::time::Instant::now(), from_zmq(m)))
                        .is_err()
                    {
                        break;
                    }
                }
                Err(e) => {
                    eprintln!("partita: shell receive failed: {e}");
                    tokio::time::sleep(std::time::Duration::from_millis(50)).await;
                }
            }
        }
    });
    {
        let exit_tx = exit_tx.clone();
        tokio::spawn(async move {
            loop {
                match control_recv.recv().await {
                    Ok(m) => {
                        let frames = from_zmq(m);
                        if let Some(msg) = decode_or_log(&signer, &frames, "control") {
                            if control_handler.handle(&msg) == Flow::Shutdown {
                                let _ = exit_tx.send(());
                            }
                        }
                    }
                    Err(e) => {
                        eprintln!("partita: control receive failed: {e}");
                        tokio::time::sleep(std::time::Duration::from_millis(50)).await;
                    }
                }
            }
        });
    }
    exit_rx.recv().await;
    tokio::time::sleep(std::time::Duration::from_millis(150)).await;
    Ok(())
}

/// What the shell thread is given to do.
enum Work {
    /// A shell request, with the time it arrived.
    Request(std::time::Instant, Frames),
    /// A watched file changed.
    Changed(std::path::PathBuf),
}

fn shell_loop<T: Transport>(
    mut d: Dispatcher<T>,
    signer: Signer,
    rx: std::sync::mpsc::Receiver<Work>,
    changes: std::sync::mpsc::Sender<Work>,
    exit_tx: UnboundedSender<()>,
) {
    use std::sync::mpsc::RecvTimeoutError;
    // Execute requests that arrived before this instant are aborted (stop_on_error).
    let mut abort_before: Option<std::time::Instant> = None;
    let mut debounce = Debounce::new(QUIET);
    let mut watch: Option<FileWatch> = None;
    let mut watched: Vec<std::path::PathBuf> = Vec::new();
    loop {
        let work = match debounce.timeout() {
            None => rx.recv().map_err(|_| RecvTimeoutError::Disconnected),
            Some(t) => rx.recv_timeout(t),
        };
        match work {
            Ok(Work::Request(arrived, frames)) => {
                let Some(m) = decode_or_log(&signer, &frames, "shell") else {
                    continue;
                };
                if is_execute(&m) && abort_before.is_some_and(|t| arrived < t) {
                    d.abort(Channel::Shell, &m);
                    continue;
                }
                if abort_before.is_some_and(|t| arrived >= t) {
                    abort_before = None;
                }
                if d.handle(Channel::Shell, &m) == Flow::Shutdown {
                    let _ = exit_tx.send(());
                    return;
                }
                if d.take_failed() {
                    abort_before = Some(d.replied_at());
                }
                let now = d.watched();
                if now != watched {
                    if watch.is_none() && !now.is_empty() {
                        let tx = changes.clone();
                        watch = FileWatch::new(move |p| {
                            let _ = tx.send(Work::Changed(p));
                        })
                        .map_err(|e| eprintln!("partita: {e}"))
                        .ok();
                    }
                    if let Some(w) = watch.as_mut() {
                        w.set(&now);
                    }
                    watched = now;
                }
            }
            Ok(Work::Changed(p)) => debounce.touched(p),
            Err(RecvTimeoutError::Timeout) => {}
            Err(RecvTimeoutError::Disconnected) => return,
        }
        for p in debounce.due() {
            if watched.contains(&p) {
                d.refresh(&p);
            }
        }
    }
}
