//! Message type → handler, behind a small [`Transport`] trait so that every handler can be
//! tested with an in-memory transport.
//!
//! One wrapper, [`Dispatcher::handle`], publishes `busy`, runs the handler, always sends a
//! reply (an error reply if the handler failed or panicked) and then publishes `idle`; nothing
//! in between returns early. Aborted and unknown requests get the same pairing.

use crate::interp::{Completeness, DisplayOut, ExecError, Interpreter};
use crate::message::{PROTOCOL_VERSION, Replier, Request};
use crate::wire::{Message, Signer};
use serde_json::{Value, json};
use std::panic::{AssertUnwindSafe, catch_unwind};
use std::sync::Arc;
use std::sync::atomic::{AtomicBool, Ordering};

/// Which socket a message leaves by.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Channel {
    /// Shell replies.
    Shell,
    /// Control replies.
    Control,
    /// IOPub broadcasts.
    IoPub,
}

/// Sends messages out; the real one feeds socket-owner tasks, the test one records.
pub trait Transport: Send {
    /// Queues `m` on `channel`.
    fn send(&self, channel: Channel, m: Message);
}

/// What the caller should do after a message.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Flow {
    /// Go on.
    Continue,
    /// Exit after flushing (a shutdown was answered).
    Shutdown,
}

/// Handles shell and control requests.
pub struct Dispatcher<T: Transport> {
    /// Builds outgoing messages.
    pub replier: Replier,
    transport: T,
    interp: Box<dyn Interpreter>,
    interrupt: Arc<AtomicBool>,
    execution_count: u64,
    failed: bool,
    replied_at: std::time::Instant,
    /// The execute_request (header only) under which each display id was first sent: a
    /// refresh's updates carry it as their parent, so front ends route them to the cell.
    parents: std::collections::HashMap<String, Message>,
}

fn status(ok: bool) -> &'static str {
    if ok { "ok" } else { "error" }
}

/// kernel_info_reply content.
pub fn kernel_info_content(interp: &dyn Interpreter) -> Value {
    let li = interp.language_info();
    json!({
        "status": "ok",
        "protocol_version": PROTOCOL_VERSION,
        "implementation": li.implementation,
        "implementation_version": li.implementation_version,
        "language_info": {
            "name": li.name, "version": li.version, "mimetype": li.mimetype,
            "file_extension": li.file_extension,
        },
        "banner": li.banner,
        "debugger": false,
        "help_links": [],
    })
}

impl<T: Transport> Dispatcher<T> {
    /// A dispatcher around `interp`; `interrupt` is shared with the control handler.
    pub fn new(
        transport: T,
        interp: Box<dyn Interpreter>,
        interrupt: Arc<AtomicBool>,
        replier: Replier,
    ) -> Self {
        Dispatcher {
            replier,
            transport,
            interp,
            interrupt,
            execution_count: 0,
            failed: false,
            replied_at: std::time::Instant::now(),
            parents: std::collections::HashMap::new(),
        }
    }

    fn publish(&self, parent: &Message, msg_type: &str, content: Value) {
        self.transport.send(
            Channel::IoPub,
            self.replier.broadcast(Some(parent), msg_type, content),
        );
    }

    /// Handles one decoded request that arrived on `channel`: busy, reply, idle.
    pub fn handle(&mut self, channel: Channel, m: &Message) -> Flow {
        self.publish(m, "status", json!({"execution_state": "busy"}));
        let req = Request::decode(m);
        let (reply_type, content, flow) = match catch_unwind(AssertUnwindSafe(|| {
            self.answer(m, &req)
        })) {
            Ok(r) => r,
            Err(_) => {
                let rt = reply_type(m.msg_type());
                let c = json!({"status": "error", "ename": "InternalError",
                    "evalue": "partita hit an internal error; the kernel is still running — please report this",
                    "traceback": []});
                (rt, c, Flow::Continue)
            }
        };
        self.replied_at = std::time::Instant::now();
        self.transport
            .send(channel, self.replier.reply_to(m, &reply_type, content));
        self.publish(m, "status", json!({"execution_state": "idle"}));
        flow
    }

    /// When the last reply was sent: requests that arrived before it are the queue a failure
    /// with stop_on_error aborts.
    pub fn replied_at(&self) -> std::time::Instant {
        self.replied_at
    }

    /// Whether the last request was an execute that failed with stop_on_error (then cleared).
    pub fn take_failed(&mut self) -> bool {
        std::mem::take(&mut self.failed)
    }

    /// Answers an execute_request that was queued behind a failed one.
    pub fn abort(&mut self, channel: Channel, m: &Message) {
        self.publish(m, "status", json!({"execution_state": "busy"}));
        let content = json!({"status": "aborted", "execution_count": self.execution_count});
        self.transport.send(
            channel,
            self.replier.reply_to(m, &reply_type(m.msg_type()), content),
        );
        self.publish(m, "status", json!({"execution_state": "idle"}));
    }

    fn answer(&mut self, m: &Message, req: &Request) -> (String, Value, Flow) {
        let rt = reply_type(m.msg_type());
        let (content, flow) = match req {
            Request::KernelInfo => (kernel_info_content(self.interp.as_ref()), Flow::Continue),
            Request::Execute(e) => (self.execute(m, e), Flow::Continue),
            Request::Complete(c) => {
                let r = self.interp.complete(&c.code, c.cursor_pos);
                (
                    json!({"status": "ok", "matches": r.matches, "cursor_start": r.cursor_start,
                        "cursor_end": r.cursor_end, "metadata": {}}),
                    Flow::Continue,
                )
            }
            Request::Inspect(c) => {
                let found = self.interp.inspect(&c.code, c.cursor_pos);
                (
                    json!({"status": "ok", "found": found.is_some(), "data": found.unwrap_or_default(), "metadata": {}}),
                    Flow::Continue,
                )
            }
            Request::IsComplete(c) => {
                let s = match self.interp.is_complete(&c.code) {
                    Completeness::Complete => json!({"status": "complete"}),
                    Completeness::Incomplete => json!({"status": "incomplete", "indent": "  "}),
                    Completeness::Invalid => json!({"status": "invalid"}),
                };
                (s, Flow::Continue)
            }
            Request::History => (json!({"status": "ok", "history": []}), Flow::Continue),
            Request::CommInfo => (json!({"status": "ok", "comms": {}}), Flow::Continue),
            Request::Shutdown(s) => (
                json!({"status": "ok", "restart": s.restart}),
                Flow::Shutdown,
            ),
            Request::Interrupt => {
                self.interrupt.store(true, Ordering::SeqCst);
                (json!({"status": "ok"}), Flow::Continue)
            }
            Request::Unknown(t) => (
                json!({"status": "error", "ename": "UnknownRequest",
                    "evalue": format!("partita does not handle \"{t}\" messages"), "traceback": []}),
                Flow::Continue,
            ),
        };
        (rt, content, flow)
    }

    fn execute(&mut self, m: &Message, e: &crate::message::ExecuteRequest) -> Value {
        let counted = !e.silent && e.store_history;
        if counted {
            self.execution_count += 1;
        }
        let count = self.execution_count;
        // Cleared before execute_input is published, so an interrupt sent on seeing it counts.
        self.interrupt.store(false, Ordering::SeqCst);
        if !e.silent {
            self.publish(
                m,
                "execute_input",
                json!({"code": e.code, "execution_count": count}),
            );
        }
        let silent = e.silent;
        let interrupt = self.interrupt.clone();
        let replier = self.replier.clone();
        let transport = &self.transport;
        let parents = &mut self.parents;
        let mut sink = |d: DisplayOut| {
            if silent {
                return;
            }
            if let (Some(id), false) = (&d.display_id, d.update) {
                parents.insert(id.clone(), header_only(m));
            }
            let transient = match &d.display_id {
                Some(id) => json!({"display_id": id}),
                None => json!({}),
            };
            let (t, c) = if d.update && d.display_id.is_some() {
                (
                    "update_display_data",
                    json!({"data": d.data, "metadata": d.metadata, "transient": transient}),
                )
            } else if d.is_result {
                (
                    "execute_result",
                    json!({"execution_count": count, "data": d.data, "metadata": d.metadata}),
                )
            } else {
                (
                    "display_data",
                    json!({"data": d.data, "metadata": d.metadata, "transient": transient}),
                )
            };
            transport.send(Channel::IoPub, replier.broadcast(Some(m), t, c));
        };
        let result = catch_unwind(AssertUnwindSafe(|| self.interp.execute(&e.code, &interrupt, &mut sink)))
            .unwrap_or_else(|_| {
                Err(ExecError {
                    ename: "InternalError".into(),
                    evalue: "partita hit an internal error while running this cell; the kernel is still running — please report this".into(),
                    traceback: vec![],
                })
            });
        match result {
            Ok(()) => {
                json!({"status": "ok", "execution_count": count, "payload": [], "user_expressions": {}})
            }
            Err(err) => {
                self.failed = e.stop_on_error;
                if !silent {
                    self.publish(m, "error", json!({"ename": err.ename, "evalue": err.evalue, "traceback": err.traceback}));
                }
                json!({"status": status(false), "execution_count": count, "ename": err.ename,
                    "evalue": err.evalue, "traceback": err.traceback})
            }
        }
    }
}

impl<T: Transport> Dispatcher<T> {
    /// Files the interpreter wants watched.
    pub fn watched(&self) -> Vec<std::path::PathBuf> {
        self.interp.watched()
    }

    /// Lets the interpreter refresh its displays after `path` changed. Each update is sent as
    /// update_display_data under the execute_request that created its display; an update for
    /// a display this kernel never sent is dropped. A panic is logged, never fatal.
    pub fn refresh(&mut self, path: &std::path::Path) {
        self.interrupt.store(false, Ordering::SeqCst);
        let interrupt = self.interrupt.clone();
        let (replier, transport, parents) = (&self.replier, &self.transport, &self.parents);
        let mut sink = |d: DisplayOut| {
            let Some(parent) = d.display_id.as_ref().and_then(|id| parents.get(id)) else {
                return;
            };
            let c = json!({"data": d.data, "metadata": d.metadata,
                "transient": {"display_id": d.display_id}});
            transport.send(
                Channel::IoPub,
                replier.broadcast(Some(parent), "update_display_data", c),
            );
        };
        let interp = &mut self.interp;
        if catch_unwind(AssertUnwindSafe(|| {
            interp.refresh(path, &interrupt, &mut sink)
        }))
        .is_err()
        {
            eprintln!(
                "partita: internal error while refreshing after {} changed; the kernel is still running",
                path.display()
            );
        }
    }
}

/// A copy of `m` with only what a parent header needs.
fn header_only(m: &Message) -> Message {
    Message {
        identities: Vec::new(),
        header: m.header.clone(),
        parent_header: serde_json::Map::new(),
        metadata: serde_json::Map::new(),
        content: Value::Null,
        buffers: Vec::new(),
    }
}

/// `x_request` → `x_reply`.
pub fn reply_type(msg_type: &str) -> String {
    match msg_type.strip_suffix("_request") {
        Some(b) => format!("{b}_reply"),
        None => format!("{msg_type}_reply"),
    }
}

/// Whether `m` is an execute_request (the kind a failure aborts).
pub fn is_execute(m: &Message) -> bool {
    m.msg_type() == "execute_request"
}

/// Decodes frames, logging and dropping what does not verify or parse.
pub fn decode_or_log(signer: &Signer, frames: &[Vec<u8>], socket: &str) -> Option<Message> {
    match signer.decode(frames) {
        Ok(m) => Some(m),
        Err(e) => {
            eprintln!("partita: dropped a message on {socket}: {e}");
            None
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::interp::{Completions, LanguageInfo};
    use serde_json::Map;
    use std::sync::Mutex;

    #[derive(Clone, Default)]
    struct Memory(Arc<Mutex<Vec<(Channel, Message)>>>);
    impl Transport for Memory {
        fn send(&self, c: Channel, m: Message) {
            self.0.lock().unwrap().push((c, m));
        }
    }

    struct Echo;
    impl Interpreter for Echo {
        fn execute(
            &mut self,
            code: &str,
            _: &Arc<AtomicBool>,
            out: &mut dyn FnMut(DisplayOut),
        ) -> Result<(), ExecError> {
            match code {
                "fail" => Err(ExecError {
                    ename: "DataError".into(),
                    evalue: "bad".into(),
                    traceback: vec!["bad".into()],
                }),
                "panic" => panic!("boom"),
                "live" => {
                    let mut data = Map::new();
                    data.insert("text/plain".into(), Value::String("old".into()));
                    out(DisplayOut {
                        data,
                        metadata: Map::new(),
                        is_result: false,
                        display_id: Some("L1".into()),
                        update: false,
                    });
                    Ok(())
                }
                "progress" => {
                    let text = |t: &str| {
                        let mut d = Map::new();
                        d.insert("text/plain".into(), Value::String(t.into()));
                        d
                    };
                    for (t, update) in [("0%", false), ("50%", true)] {
                        out(DisplayOut {
                            data: text(t),
                            metadata: Map::new(),
                            is_result: false,
                            display_id: Some("p1".into()),
                            update,
                        });
                    }
                    Ok(())
                }
                _ => {
                    let mut data = Map::new();
                    data.insert("text/plain".into(), Value::String(code.into()));
                    out(DisplayOut {
                        data,
                        metadata: Map::new(),
                        is_result: true,
                        display_id: None,
                        update: false,
                    });
                    Ok(())
                }
            }
        }
        fn complete(&mut self, _: &str, c: usize) -> Completions {
            Completions {
                matches: vec!["anova".into()],
                cursor_start: 0,
                cursor_end: c,
            }
        }
        fn inspect(&mut self, _: &str, _: usize) -> Option<Map<String, Value>> {
            None
        }
        fn is_complete(&mut self, _: &str) -> Completeness {
            Completeness::Complete
        }
        fn refresh(
            &mut self,
            path: &std::path::Path,
            _: &Arc<AtomicBool>,
            out: &mut dyn FnMut(DisplayOut),
        ) {
            if path.ends_with("panic.csv") {
                panic!("boom");
            }
            for id in ["L1", "never-sent"] {
                let mut data = Map::new();
                data.insert("text/plain".into(), Value::String("new".into()));
                out(DisplayOut {
                    data,
                    metadata: Map::new(),
                    is_result: false,
                    display_id: Some(id.into()),
                    update: true,
                });
            }
        }
        fn language_info(&self) -> LanguageInfo {
            LanguageInfo {
                name: "x".into(),
                version: "1".into(),
                mimetype: "text/x".into(),
                file_extension: ".x".into(),
                banner: "b".into(),
                implementation: "i".into(),
                implementation_version: "1".into(),
            }
        }
    }

    fn request(t: &str, content: Value) -> Message {
        let Value::Object(header) = json!({"msg_id": "m", "msg_type": t, "session": "c", "username": "u",
            "date": "", "version": "5.3"})
        else {
            unreachable!()
        };
        Message {
            identities: vec![b"p".to_vec()],
            header,
            parent_header: Map::new(),
            metadata: Map::new(),
            content,
            buffers: vec![],
        }
    }

    fn dispatcher() -> (Memory, Dispatcher<Memory>) {
        let mem = Memory::default();
        let d = Dispatcher::new(
            mem.clone(),
            Box::new(Echo),
            Arc::new(AtomicBool::new(false)),
            Replier::new(),
        );
        (mem, d)
    }

    fn run(t: &str, content: Value) -> Vec<(Channel, Message)> {
        let (mem, mut d) = dispatcher();
        d.handle(Channel::Shell, &request(t, content));
        let v = mem.0.lock().unwrap().clone();
        v
    }

    fn types(v: &[(Channel, Message)]) -> Vec<String> {
        v.iter().map(|(_, m)| m.msg_type().to_string()).collect()
    }

    #[test]
    fn every_request_type_is_wrapped_in_busy_and_idle_with_one_reply() {
        for (t, c) in [
            ("kernel_info_request", json!({})),
            ("execute_request", json!({"code": "x"})),
            ("execute_request", json!({"code": "fail"})),
            ("execute_request", json!({"code": "panic"})),
            ("complete_request", json!({"code": "an", "cursor_pos": 2})),
            ("inspect_request", json!({"code": "x", "cursor_pos": 0})),
            ("is_complete_request", json!({"code": "x"})),
            ("history_request", json!({})),
            ("comm_info_request", json!({})),
            ("made_up_request", json!({})),
            ("execute_request", json!({"code": 7})),
        ] {
            let v = run(t, c);
            let statuses: Vec<&str> = v
                .iter()
                .filter(|(_, m)| m.msg_type() == "status")
                .map(|(_, m)| m.content["execution_state"].as_str().unwrap())
                .collect();
            assert_eq!(statuses, ["busy", "idle"], "{t}");
            assert_eq!(types(&v).first().map(String::as_str), Some("status"));
            assert_eq!(types(&v).last().map(String::as_str), Some("status"));
            let replies: Vec<_> = v.iter().filter(|(c, _)| *c == Channel::Shell).collect();
            assert_eq!(replies.len(), 1, "{t}");
            assert_eq!(replies[0].1.msg_type(), reply_type(t));
            assert!(v.iter().all(|(_, m)| m.parent_header["msg_id"] == "m"));
        }
    }

    #[test]
    fn execute_order_and_counts() {
        let v = run("execute_request", json!({"code": "x"}));
        assert_eq!(
            types(&v),
            [
                "status",
                "execute_input",
                "execute_result",
                "execute_reply",
                "status"
            ]
        );
        assert_eq!(v[2].1.content["execution_count"], 1);
        let v = run("execute_request", json!({"code": "fail"}));
        assert_eq!(
            types(&v),
            [
                "status",
                "execute_input",
                "error",
                "execute_reply",
                "status"
            ]
        );
        assert_eq!(v[3].1.content["status"], "error");
        let v = run("execute_request", json!({"code": "panic"}));
        assert_eq!(v[3].1.content["ename"], "InternalError");
        let v = run("execute_request", json!({"code": "x", "silent": true}));
        assert_eq!(types(&v), ["status", "execute_reply", "status"]);
        assert_eq!(v[1].1.content["execution_count"], 0);
    }

    #[test]
    fn display_ids_travel_in_transient_and_updates_replace() {
        let v = run("execute_request", json!({"code": "progress"}));
        assert_eq!(
            types(&v),
            [
                "status",
                "execute_input",
                "display_data",
                "update_display_data",
                "execute_reply",
                "status"
            ]
        );
        for m in [&v[2].1, &v[3].1] {
            assert_eq!(m.content["transient"]["display_id"], "p1");
        }
        assert_eq!(v[3].1.content["data"]["text/plain"], "50%");
    }

    #[test]
    fn refresh_updates_go_under_the_request_that_created_the_display() {
        let (mem, mut d) = dispatcher();
        let mut first = request("execute_request", json!({"code": "live"}));
        first.header.insert("msg_id".into(), json!("creator"));
        d.handle(Channel::Shell, &first);
        let mut other = request("execute_request", json!({"code": "x"}));
        other.header.insert("msg_id".into(), json!("later"));
        d.handle(Channel::Shell, &other);
        mem.0.lock().unwrap().clear();
        d.refresh(std::path::Path::new("/data/a.csv"));
        let v = mem.0.lock().unwrap().clone();
        // One update (the id never sent is dropped), with no busy/idle of its own.
        assert_eq!(types(&v), ["update_display_data"]);
        let m = &v[0].1;
        assert_eq!(v[0].0, Channel::IoPub);
        assert_eq!(m.parent_header["msg_id"], "creator");
        assert_eq!(m.content["transient"]["display_id"], "L1");
        assert_eq!(m.content["data"]["text/plain"], "new");
        // A panicking refresh is contained.
        d.refresh(std::path::Path::new("/data/panic.csv"));
        d.handle(Channel::Shell, &other);
    }

    #[test]
    fn kernel_info_golden_fields() {
        let v = run("kernel_info_request", json!({}));
        let c = &v[1].1.content;
        for k in [
            "status",
            "protocol_version",
            "implementation",
            "implementation_version",
            "language_info",
            "banner",
            "help_links",
        ] {
            assert!(c.get(k).is_some(), "{k}");
        }
        assert_eq!(c["protocol_version"], "5.3");
        for k in ["name", "version", "mimetype", "file_extension"] {
            assert!(c["language_info"].get(k).is_some(), "{k}");
        }
    }

    #[test]
    fn complete_and_shutdown_replies() {
        let v = run("complete_request", json!({"code": "an", "cursor_pos": 2}));
        assert_eq!(
            v[1].1.content,
            json!({"status": "ok", "matches": ["anova"], "cursor_start": 0, "cursor_end": 2, "metadata": {}})
        );
        let (mem, mut d) = dispatcher();
        assert_eq!(
            d.handle(
                Channel::Control,
                &request("shutdown_request", json!({"restart": true}))
            ),
            Flow::Shutdown
        );
        assert_eq!(
            mem.0.lock().unwrap()[1].1.content,
            json!({"status": "ok", "restart": true})
        );
    }

    #[test]
    fn aborted_requests_are_paired_too() {
        let (mem, mut d) = dispatcher();
        d.abort(
            Channel::Shell,
            &request("execute_request", json!({"code": "x"})),
        );
        let v = mem.0.lock().unwrap().clone();
        assert_eq!(types(&v), ["status", "execute_reply", "status"]);
        assert_eq!(v[1].1.content["status"], "aborted");
    }
}

/// Handles control requests while the shell may be busy: it never touches the interpreter.
pub struct Control<T: Transport> {
    replier: Replier,
    transport: T,
    info: Value,
    interrupt: Arc<AtomicBool>,
}

impl<T: Transport> Control<T> {
    /// A control handler; `info` is the kernel_info_reply content.
    pub fn new(transport: T, info: Value, interrupt: Arc<AtomicBool>, replier: Replier) -> Self {
        Control {
            replier,
            transport,
            info,
            interrupt,
        }
    }

    /// Busy, reply, idle.
    pub fn handle(&self, m: &Message) -> Flow {
        let pubm = |state: &str| {
            self.transport.send(
                Channel::IoPub,
                self.replier
                    .broadcast(Some(m), "status", json!({"execution_state": state})),
            )
        };
        pubm("busy");
        let (content, flow) = match Request::decode(m) {
            Request::KernelInfo => (self.info.clone(), Flow::Continue),
            Request::Interrupt => {
                self.interrupt.store(true, Ordering::SeqCst);
                (json!({"status": "ok"}), Flow::Continue)
            }
            Request::Shutdown(s) => (
                json!({"status": "ok", "restart": s.restart}),
                Flow::Shutdown,
            ),
            other => (
                json!({"status": "error", "ename": "UnknownRequest",
                    "evalue": format!("partita does not handle {other:?} on the control channel"), "traceback": []}),
                Flow::Continue,
            ),
        };
        self.transport.send(
            Channel::Control,
            self.replier.reply_to(m, &reply_type(m.msg_type()), content),
        );
        pubm("idle");
        flow
    }
}

impl<T: Transport> Dispatcher<T> {
    /// The kernel_info content (for the control handler).
    pub fn info(&self) -> Value {
        kernel_info_content(self.interp.as_ref())
    }
}
