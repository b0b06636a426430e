//! What a long-running verb sets up around its work: the async runtime,
//! the log on stderr, and the signal that stops a server.

/// A multi-threaded tokio runtime with every driver enabled.
pub fn runtime() -> anyhow::Result<tokio::runtime::Runtime> {
    Ok(tokio::runtime::Builder::new_multi_thread()
        .enable_all()
        .build()?)
}

/// Logs to stderr, filtered by `HODOS_LOG` (default `info,tower_http=warn`).
pub fn init_tracing() {
    let filter = tracing_subscriber::EnvFilter::try_from_env("HODOS_LOG")
        .unwrap_or_else(|_| tracing_subscriber::EnvFilter::new("info,tower_http=warn"));
    // Colour codes only for a terminal: a log redirected to a file or a
    // collector gets plain text.
    let ansi = std::io::IsTerminal::is_terminal(&std::io::stderr());
    let _ = tracing_subscriber::fmt()
        .with_env_filter(filter)
        .with_ansi(ansi)
        .with_writer(std::io::stderr)
        .try_init();
}

/// Resolves on Ctrl-C or SIGTERM. The SIGTERM handler is installed when
/// this is called (not when first polled), so a signal that arrives right
/// after the caller announces it is serving still stops it gracefully.
/// Must be called inside the runtime.
pub fn shutdown_signal() -> impl std::future::Future<Output = ()> {
    #[cfg(unix)]
    let term = tokio::signal::unix::signal(tokio::signal::unix::SignalKind::terminate()).ok();
    async move {
        let ctrl_c = async {
            let _ = tokio::signal::ctrl_c().await;
        };
        #[cfg(unix)]
        let term = async move {
            match term {
                Some(mut s) => {
                    s.recv().await;
                }
                None => std::future::pending::<()>().await,
            }
        };
        #[cfg(not(unix))]
        let term = std::future::pending::<()>();
        tokio::select! {
            _ = ctrl_c => {},
            _ = term => {},
        }
    }
}
