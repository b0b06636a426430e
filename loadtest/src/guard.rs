//! Target guard: every address this tool sends traffic to must be a
//! loopback address (127.0.0.0/8 or ::1, also as an IPv4-mapped IPv6
//! address). Host names are resolved and every resolved address is checked;
//! one non-loopback address refuses the whole target. Load is only ever
//! generated against servers on this machine.

use std::net::{IpAddr, SocketAddr};

/// Why a target was refused.
#[derive(Debug, thiserror::Error)]
pub enum TargetError {
    #[error("target {given:?} is not HOST:PORT (e.g. 127.0.0.1:8080)")]
    Syntax { given: String },
    #[error("target {given:?} could not be resolved: {source}")]
    Resolve {
        given: String,
        #[source]
        source: std::io::Error,
    },
    #[error("target {given:?} resolved to no address")]
    Empty { given: String },
    #[error(
        "refusing target {given:?}: it resolves to {addr}, which is not a loopback address; \
         this tool only sends load to 127.0.0.0/8 or ::1 on this machine"
    )]
    NotLoopback { given: String, addr: IpAddr },
}

/// Loopback test that also accepts `::ffff:127.x.y.z`.
pub fn is_loopback(ip: IpAddr) -> bool {
    match ip {
        IpAddr::V4(v4) => v4.is_loopback(),
        IpAddr::V6(v6) => {
            v6.is_loopback()
                || v6
                    .to_ipv4_mapped()
                    .map(|v4| v4.is_loopback())
                    .unwrap_or(false)
        }
    }
}

/// Checks an already resolved address.
pub fn check_addr(given: &str, addr: SocketAddr) -> Result<SocketAddr, TargetError> {
    if is_loopback(addr.ip()) {
        Ok(addr)
    } else {
        Err(TargetError::NotLoopback {
            given: given.to_string(),
            addr: addr.ip(),
        })
    }
}

/// Resolves `HOST:PORT` and returns the first address if every resolved
/// address is loopback.
pub async fn resolve_loopback(given: &str) -> Result<SocketAddr, TargetError> {
    let given = given.trim();
    let trimmed = given
        .strip_prefix("http://")
        .unwrap_or(given)
        .trim_end_matches('/');
    if trimmed
        .rsplit_once(':')
        .map(|(h, p)| h.is_empty() || p.parse::<u16>().is_err())
        .unwrap_or(true)
    {
        return Err(TargetError::Syntax {
            given: given.to_string(),
        });
    }
    let addrs: Vec<SocketAddr> = tokio::net::lookup_host(trimmed)
        .await
        .map_err(|source| TargetError::Resolve {
            given: given.to_string(),
            source,
        })?
        .collect();
    if addrs.is_empty() {
        return Err(TargetError::Empty {
            given: given.to_string(),
        });
    }
    for a in &addrs {
        check_addr(given, *a)?;
    }
    Ok(addrs[0])
}

#[cfg(test)]
mod tests {
    use super::*;

    // Address classes from RFC 1122 §3.2.1.3 (127.0.0.0/8 is loopback) and
    // RFC 4291 §2.5.3 (::1) and §2.5.5.2 (IPv4-mapped addresses).
    #[test]
    fn loopback_classes() {
        for ok in ["127.0.0.1", "127.255.0.9", "::1", "::ffff:127.0.0.1"] {
            assert!(is_loopback(ok.parse().unwrap()), "{ok}");
        }
        for bad in [
            "10.0.0.1",
            "192.168.1.1",
            "172.16.0.1",
            "8.8.8.8",
            "0.0.0.0",
            "::",
            "::ffff:10.0.0.1",
        ] {
            assert!(!is_loopback(bad.parse().unwrap()), "{bad}");
        }
    }

    #[tokio::test]
    async fn refuses_non_loopback_and_bad_syntax() {
        assert!(resolve_loopback("127.0.0.1:8080").await.is_ok());
        assert!(resolve_loopback("[::1]:8080").await.is_ok());
        assert!(resolve_loopback("http://127.0.0.1:9/").await.is_ok());
        assert!(matches!(
            resolve_loopback("10.1.2.3:80").await,
            Err(TargetError::NotLoopback { .. })
        ));
        assert!(matches!(
            resolve_loopback("0.0.0.0:80").await,
            Err(TargetError::NotLoopback { .. })
        ));
        assert!(matches!(
            resolve_loopback("127.0.0.1").await,
            Err(TargetError::Syntax { .. })
        ));
        assert!(matches!(
            resolve_loopback(":80").await,
            Err(TargetError::Syntax { .. })
        ));
    }

    #[tokio::test]
    async fn localhost_resolves_to_loopback_only() {
        // `localhost` resolves through /etc/hosts to loopback on any sane
        // machine (RFC 6761 §6.3); if a resolver says otherwise, refusing is
        // the right answer too.
        match resolve_loopback("localhost:8080").await {
            Ok(a) => assert!(is_loopback(a.ip())),
            Err(e) => assert!(matches!(
                e,
                TargetError::NotLoopback { .. } | TargetError::Resolve { .. }
            )),
        }
    }
}
