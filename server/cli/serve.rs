//! `massline serve`: build the assembled server ([`crate::startup::Application`]) and run it
//! until Ctrl-C.

use std::io::IsTerminal;

use tracing_subscriber::EnvFilter;

use crate::config::Settings;
use crate::startup::Application;

/// Runs the web service with `settings`, printing the demo accounts it created (once) and
/// logging to standard output (`RUST_LOG` chooses the level; default `info,sqlx=warn`; colours
/// only on a terminal, so a log written to a file or a collector stays plain text).
///
/// # Errors
/// When the server cannot be built (database, demo catalog, address) or fails while running.
pub fn run(settings: Settings) -> anyhow::Result<()> {
    tracing_subscriber::fmt()
        .with_env_filter(
            EnvFilter::try_from_default_env().unwrap_or_else(|_| EnvFilter::new("info,sqlx=warn")),
        )
        .with_ansi(std::io::stdout().is_terminal())
        .init();
    let runtime = tokio::runtime::Runtime::new()?;
    runtime.block_on(async move {
        let app = Application::build(settings).await?;
        if !app.demo_accounts().is_empty() {
            // Printed once, to the console only (never to the log): these passwords are not
            // stored anywhere in clear.
            println!("Demo accounts created (the passwords are shown only now):");
            for a in app.demo_accounts() {
                println!("  {:<14} {:<9} {}", a.username, a.role, a.password);
            }
        }
        tracing::info!("massline is listening on http://{}", app.address());
        app.run_until(async {
            // If the signal handler cannot be installed the server still runs; it just has to be
            // stopped by other means.
            let _ = tokio::signal::ctrl_c().await;
            tracing::info!("stopping: finishing open requests");
        })
        .await
    })
}
