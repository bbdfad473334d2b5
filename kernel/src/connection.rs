//! The connection file Jupyter writes for a kernel.

use serde::Deserialize;

/// The connection file's fields.
#[derive(Debug, Clone, Deserialize, PartialEq)]
pub struct ConnectionInfo {
    /// Only `tcp` is supported.
    pub transport: String,
    /// The address to bind (`*` means every interface).
    pub ip: String,
    /// Shell ROUTER port.
    pub shell_port: u16,
    /// IOPub PUB port.
    pub iopub_port: u16,
    /// Stdin ROUTER port.
    pub stdin_port: u16,
    /// Control ROUTER port.
    pub control_port: u16,
    /// Heartbeat REP port.
    pub hb_port: u16,
    /// `hmac-sha256`, or empty with an empty key.
    #[serde(default)]
    pub signature_scheme: String,
    /// The HMAC key; empty means messages are not signed.
    #[serde(default)]
    pub key: String,
}

impl ConnectionInfo {
    /// Parses and validates a connection file's text.
    pub fn parse(text: &str) -> Result<ConnectionInfo, String> {
        let c: ConnectionInfo = serde_json::from_str(text)
            .map_err(|e| format!("the connection file is not valid: {e}"))?;
        if c.transport != "tcp" {
            return Err(format!(
                "transport \"{}\" is not supported; partita speaks tcp only",
                c.transport
            ));
        }
        if !c.key.is_empty() && c.signature_scheme != "hmac-sha256" {
            return Err(format!(
                "signature scheme \"{}\" is not supported; partita signs with hmac-sha256",
                c.signature_scheme
            ));
        }
        Ok(c)
    }

    /// The endpoint for `port` (`*` becomes `0.0.0.0`, which the zeromq crate parses).
    pub fn endpoint(&self, port: u16) -> String {
        let ip = if self.ip == "*" {
            "0.0.0.0"
        } else {
            self.ip.as_str()
        };
        if ip.contains(':') {
            format!("tcp://[{ip}]:{port}")
        } else {
            format!("tcp://{ip}:{port}")
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    const FILE: &str = r#"{"shell_port": 5001, "iopub_port": 5002, "stdin_port": 5003, "control_port": 5004,
        "hb_port": 5005, "ip": "127.0.0.1", "key": "abc", "transport": "tcp",
        "signature_scheme": "hmac-sha256", "kernel_name": "partita"}"#;

    #[test]
    fn parses_a_connection_file() {
        let c = ConnectionInfo::parse(FILE).unwrap();
        assert_eq!(c.endpoint(c.shell_port), "tcp://127.0.0.1:5001");
        assert_eq!(c.key, "abc");
    }

    #[test]
    fn star_binds_every_interface() {
        let c = ConnectionInfo::parse(&FILE.replace("127.0.0.1", "*")).unwrap();
        assert_eq!(c.endpoint(5), "tcp://0.0.0.0:5");
    }

    #[test]
    fn other_schemes_are_refused() {
        let e = ConnectionInfo::parse(&FILE.replace("hmac-sha256", "hmac-md5")).unwrap_err();
        assert!(e.contains("hmac-md5"), "{e}");
        let e = ConnectionInfo::parse(&FILE.replace("\"tcp\"", "\"ipc\"")).unwrap_err();
        assert!(e.contains("ipc"));
        // An empty key with no scheme is an unsigned connection, which the protocol allows.
        let c = ConnectionInfo::parse(&FILE.replace("\"abc\"", "\"\"").replace("hmac-sha256", ""))
            .unwrap();
        assert!(c.key.is_empty());
    }
}
