//! Partita's Jupyter kernel: messaging protocol 5.3 over ZeroMQ, with no statistics.
//!
//! [`wire`] converts frames to messages and signs and verifies them (no I/O); [`message`]
//! decodes content by type and builds replies; [`dispatch`] maps requests to handlers behind
//! a [`dispatch::Transport`] trait; [`channels`] owns the sockets and threads; [`watch`] follows
//! data files for live refresh. The language is reached only through the
//! [`interp::Interpreter`] hooks.
//!
//! ```
//! let s = kernel::wire::Signer::new("key");
//! assert_eq!(s.sign([b"{}", b"{}", b"{}", b"{}"]).len(), 64);
//! ```
#![deny(missing_docs)]

pub mod channels;
pub mod connection;
pub mod dispatch;
pub mod interp;
pub mod message;
pub mod watch;
pub mod wire;

pub use channels::{DEFAULT_MAX_MESSAGE_BYTES, Limits, serve};
pub use connection::ConnectionInfo;
