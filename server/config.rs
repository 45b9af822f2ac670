//! Settings of a running server, from command-line flags or `MASSLINE_*` environment variables.
//!
//! Every value is validated before anything starts: a bad value stops start-up with one sentence
//! that names the setting (flag and variable) and the values it accepts.

use std::net::SocketAddr;
use std::path::PathBuf;
use std::time::Duration;

/// Default SQLite file, relative to the working directory.
pub const DEFAULT_DB_PATH: &str = "massline.db";
/// Default address: loopback only, so a fresh install is not reachable from the network.
pub const DEFAULT_BIND: &str = "127.0.0.1:8080";
/// Default sphere-of-influence threshold: θ_infl / resolution at or above this counts as resolved
/// (common practice: the sphere of influence should be at least as large as the resolution).
pub const DEFAULT_SOI_THRESHOLD: f64 = 1.0;
/// Default API requests per account (or client address) and minute: 10 a second on average, far
/// above what a script placing or fitting needs, low enough that one runaway loop cannot crowd
/// out the others.
pub const DEFAULT_API_RATE_PER_MINUTE: u32 = 600;
/// Default page requests per account (or client address) and minute: a minute's worth may come
/// at once, far more than a person clicking through pages asks for (each page is one request;
/// its charts are inline and the stylesheet is not counted).
pub const DEFAULT_PAGE_RATE_PER_MINUTE: u32 = 600;
/// Largest accepted rate of either budget, requests per minute.
pub const MAX_API_RATE_PER_MINUTE: u32 = 1_000_000;

/// Everything `massline serve` needs.
#[derive(clap::Args, Debug, Clone)]
pub struct Settings {
    /// SQLite database file; created, with its schema, when missing.
    #[arg(long = "db", env = "MASSLINE_DB", default_value = DEFAULT_DB_PATH, value_parser = parse_db_path)]
    pub db_path: PathBuf,

    /// Address to listen on, HOST:PORT (port 0 picks a free port).
    #[arg(long, env = "MASSLINE_BIND", default_value = DEFAULT_BIND, value_parser = parse_bind)]
    pub bind: SocketAddr,

    /// Load the invented demo catalog into an empty database (does nothing on a non-empty one).
    #[arg(long, env = "MASSLINE_DEMO", value_parser = parse_flag, default_value = "false", num_args = 0..=1, default_missing_value = "true")]
    pub demo: bool,

    /// Ratio θ_infl / resolution at or above which a black hole's sphere of influence counts as
    /// resolved (a flag for reviewers, never a cut applied to fits).
    #[arg(long, env = "MASSLINE_SOI_THRESHOLD", default_value_t = DEFAULT_SOI_THRESHOLD, value_parser = parse_soi_threshold)]
    pub soi_threshold: f64,

    /// Let visitors who are not logged in read the catalog pages and GET endpoints (nothing that
    /// changes data, and no account pages). Off by default: without a session only the login
    /// page, the stylesheet and the health check answer.
    #[arg(long, env = "MASSLINE_PUBLIC_READ", value_parser = parse_public_read, default_value = "false", num_args = 0..=1, default_missing_value = "true")]
    pub public_read: bool,

    /// Mark cookies Secure and give them the `__Host-` prefix, and send HSTS. Turn on whenever
    /// browsers reach the server over HTTPS, including behind a TLS-terminating proxy.
    #[arg(long, env = "MASSLINE_SECURE_COOKIES", value_parser = parse_secure_cookies, default_value = "false", num_args = 0..=1, default_missing_value = "true")]
    pub secure_cookies: bool,

    /// API calls per minute of each account (all its tokens and sessions together), or of each
    /// client address without an account: every request under /api/ and every request made
    /// with an API token (a token bucket holding a minute's worth; beyond it 429 with
    /// Retry-After); 0 turns the limit off.
    #[arg(long, env = "MASSLINE_API_RATE_PER_MINUTE", default_value_t = DEFAULT_API_RATE_PER_MINUTE, value_parser = parse_api_rate)]
    pub api_rate_per_minute: u32,

    /// Page requests per minute of each logged-in account, or of each client address without
    /// one (pages, forms and downloads outside /api/; the stylesheet and the health and liveness
    /// checks are not counted); beyond it 429 with Retry-After; 0 turns the limit off.
    #[arg(long, env = "MASSLINE_PAGE_RATE_PER_MINUTE", default_value_t = DEFAULT_PAGE_RATE_PER_MINUTE, value_parser = parse_page_rate)]
    pub page_rate_per_minute: u32,

    /// Milliseconds a write waits for the database lock before the request answers 503 with
    /// Retry-After (nothing written).
    #[arg(long = "busy-timeout-ms", env = "MASSLINE_BUSY_TIMEOUT_MS", default_value_t = DEFAULT_BUSY_TIMEOUT_MS, value_parser = parse_busy_timeout_ms)]
    pub busy_timeout_ms: u64,

    /// Seconds a request may take before it is answered 503 with Retry-After (an upload still
    /// being stored when the time runs out is rolled back, whole). Raise it for very large
    /// uploads on a slow machine.
    #[arg(long = "request-timeout-s", env = "MASSLINE_REQUEST_TIMEOUT_S", default_value_t = DEFAULT_REQUEST_TIMEOUT_S, value_parser = parse_request_timeout_s)]
    pub request_timeout_s: u64,

    /// Largest size of the database file in pages of 4096 bytes (SQLite's max_page_count): a
    /// write that would need more answers 507 and changes nothing, as on a full disk. Unset: only
    /// the disk limits it. A safeguard for a shared disk, and how the tests fill the database.
    #[arg(long = "max-db-pages", env = "MASSLINE_MAX_DB_PAGES", value_parser = parse_max_db_pages)]
    pub max_db_pages: Option<u32>,
}

/// Default of `--request-timeout-s`.
pub const DEFAULT_REQUEST_TIMEOUT_S: u64 = 30;

/// Default of `--busy-timeout-ms` (the catalog's `BUSY_TIMEOUT`, 5 s).
pub const DEFAULT_BUSY_TIMEOUT_MS: u64 = 5000;

impl Settings {
    /// Settings for tests: a given database file, a free loopback port, no demo data, and no
    /// page rate (tests of crash safety and throughput send forms as fast as they can; tests of
    /// the limit set their own small budgets).
    pub fn for_tests(db_path: PathBuf) -> Self {
        Self {
            db_path,
            bind: SocketAddr::from(([127, 0, 0, 1], 0)),
            demo: false,
            soi_threshold: DEFAULT_SOI_THRESHOLD,
            public_read: false,
            secure_cookies: false,
            api_rate_per_minute: DEFAULT_API_RATE_PER_MINUTE,
            page_rate_per_minute: 0,
            busy_timeout_ms: DEFAULT_BUSY_TIMEOUT_MS,
            request_timeout_s: DEFAULT_REQUEST_TIMEOUT_S,
            max_db_pages: None,
        }
    }

    /// How long a request may take, as a duration.
    pub fn request_timeout(&self) -> Duration {
        Duration::from_secs(self.request_timeout_s)
    }

    /// The busy timeout as a duration.
    pub fn busy_timeout(&self) -> Duration {
        Duration::from_millis(self.busy_timeout_ms)
    }
}

fn parse_db_path(s: &str) -> Result<PathBuf, String> {
    let trimmed = s.trim();
    if trimmed.is_empty() {
        return Err(
            "the database path (--db, MASSLINE_DB) is empty; give a file name such as massline.db"
                .into(),
        );
    }
    let path = PathBuf::from(trimmed);
    if path.is_dir() {
        return Err(format!(
            "the database path (--db, MASSLINE_DB) '{trimmed}' is a directory; give a file name such as {trimmed}/massline.db"
        ));
    }
    Ok(path)
}

fn parse_bind(s: &str) -> Result<SocketAddr, String> {
    s.trim().parse().map_err(|_| {
        format!(
            "the listen address (--bind, MASSLINE_BIND) '{s}' is not HOST:PORT with a numeric IP address; use e.g. 127.0.0.1:8080 or 0.0.0.0:8080"
        )
    })
}

fn parse_flag(s: &str) -> Result<bool, String> {
    yes_no(s, "the demo switch (--demo, MASSLINE_DEMO)")
}

fn parse_public_read(s: &str) -> Result<bool, String> {
    yes_no(
        s,
        "the public read switch (--public-read, MASSLINE_PUBLIC_READ)",
    )
}

fn parse_secure_cookies(s: &str) -> Result<bool, String> {
    yes_no(
        s,
        "the secure cookie switch (--secure-cookies, MASSLINE_SECURE_COOKIES)",
    )
}

fn yes_no(s: &str, setting: &str) -> Result<bool, String> {
    match s.trim().to_ascii_lowercase().as_str() {
        "1" | "true" | "yes" | "on" => Ok(true),
        "0" | "false" | "no" | "off" | "" => Ok(false),
        _ => Err(format!(
            "{setting} '{s}' is not a yes/no value; use true or false (also 1/0, yes/no, on/off)"
        )),
    }
}

fn parse_soi_threshold(s: &str) -> Result<f64, String> {
    match s.trim().parse::<f64>() {
        Ok(v) if v.is_finite() && v > 0.0 && v <= 100.0 => Ok(v),
        _ => Err(format!(
            "the sphere-of-influence threshold (--soi-threshold, MASSLINE_SOI_THRESHOLD) '{s}' must be a number above 0 and at most 100 (default 1)"
        )),
    }
}

fn parse_api_rate(s: &str) -> Result<u32, String> {
    match s.trim().parse::<u32>() {
        Ok(v) if v <= MAX_API_RATE_PER_MINUTE => Ok(v),
        _ => Err(format!(
            "the API rate (--api-rate-per-minute, MASSLINE_API_RATE_PER_MINUTE) '{s}' must be a whole number of requests per account and minute from 0 (no limit) to {MAX_API_RATE_PER_MINUTE} (default {DEFAULT_API_RATE_PER_MINUTE})"
        )),
    }
}

fn parse_page_rate(s: &str) -> Result<u32, String> {
    match s.trim().parse::<u32>() {
        Ok(v) if v <= MAX_API_RATE_PER_MINUTE => Ok(v),
        _ => Err(format!(
            "the page rate (--page-rate-per-minute, MASSLINE_PAGE_RATE_PER_MINUTE) '{s}' must be a whole number of requests per account and minute from 0 (no limit) to {MAX_API_RATE_PER_MINUTE} (default {DEFAULT_PAGE_RATE_PER_MINUTE})"
        )),
    }
}

fn parse_busy_timeout_ms(s: &str) -> Result<u64, String> {
    match s.trim().parse::<u64>() {
        Ok(v) if (1..=600_000).contains(&v) => Ok(v),
        _ => Err(format!(
            "the busy timeout (--busy-timeout-ms, MASSLINE_BUSY_TIMEOUT_MS) '{s}' must be a whole number of milliseconds from 1 to 600000 (default 5000)"
        )),
    }
}

fn parse_request_timeout_s(s: &str) -> Result<u64, String> {
    match s.trim().parse::<u64>() {
        Ok(v) if (1..=3600).contains(&v) => Ok(v),
        _ => Err(format!(
            "the request timeout (--request-timeout-s, MASSLINE_REQUEST_TIMEOUT_S) '{s}' must be a whole number of seconds from 1 to 3600 (default 30)"
        )),
    }
}

fn parse_max_db_pages(s: &str) -> Result<u32, String> {
    match s.trim().parse::<u32>() {
        Ok(v) if v >= MIN_DB_PAGES => Ok(v),
        _ => Err(format!(
            "the database page limit (--max-db-pages, MASSLINE_MAX_DB_PAGES) '{s}' must be a whole number of 4096-byte pages from {MIN_DB_PAGES} to 4294967294; leave it unset for no limit"
        )),
    }
}

/// Smallest accepted `--max-db-pages`: 1 MiB of 4096-byte pages. The empty schema takes about
/// 40 pages, and the health check wants 1 MiB of room for a write
/// (`catalog::health::RESERVE_BYTES`), so a smaller database could never be reported ready.
pub const MIN_DB_PAGES: u32 = 256;

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn request_timeout_is_a_whole_number_of_seconds_up_to_an_hour() {
        assert_eq!(parse_request_timeout_s(" 120 ").unwrap(), 120);
        for bad in ["0", "3601", "1.5", "", "-3"] {
            assert!(
                parse_request_timeout_s(bad)
                    .unwrap_err()
                    .contains("--request-timeout-s"),
                "{bad}"
            );
        }
    }

    #[test]
    fn busy_timeout_is_a_positive_number_of_milliseconds() {
        assert_eq!(parse_busy_timeout_ms("300").unwrap(), 300);
        assert_eq!(
            Duration::from_millis(DEFAULT_BUSY_TIMEOUT_MS),
            crate::catalog::BUSY_TIMEOUT
        );
        for bad in ["0", "-5", "1.5", "x", "600001"] {
            assert!(
                parse_busy_timeout_ms(bad)
                    .unwrap_err()
                    .contains("--busy-timeout-ms"),
                "{bad}"
            );
        }
    }

    #[test]
    fn max_db_pages_is_a_whole_number_of_pages_above_the_schema() {
        assert_eq!(parse_max_db_pages(" 5000 ").unwrap(), 5000);
        for bad in ["0", "255", "-1", "1.5", "x", "4294967296"] {
            assert!(
                parse_max_db_pages(bad)
                    .unwrap_err()
                    .contains("--max-db-pages"),
                "{bad}"
            );
        }
    }

    #[test]
    fn bind_accepts_ip_and_port_and_names_the_setting_when_wrong() {
        assert_eq!(parse_bind("127.0.0.1:0").unwrap().port(), 0);
        let err = parse_bind("localhost").unwrap_err();
        assert!(
            err.contains("MASSLINE_BIND") && err.contains("127.0.0.1:8080"),
            "{err}"
        );
    }

    #[test]
    fn demo_flag_accepts_the_usual_spellings_only() {
        for yes in ["1", "true", "YES", "on"] {
            assert!(parse_flag(yes).unwrap(), "{yes}");
        }
        for no in ["0", "false", "No", "off", ""] {
            assert!(!parse_flag(no).unwrap(), "{no}");
        }
        assert!(parse_flag("maybe").unwrap_err().contains("MASSLINE_DEMO"));
        assert!(
            parse_public_read("maybe")
                .unwrap_err()
                .contains("MASSLINE_PUBLIC_READ")
        );
        assert!(
            parse_secure_cookies("2")
                .unwrap_err()
                .contains("--secure-cookies")
        );
        assert!(parse_secure_cookies("on").unwrap());
    }

    #[test]
    fn soi_threshold_must_be_positive_and_finite() {
        // The project's accepted range 0 < X ≤ 100 (docs/methods.md §3.1).
        assert!((parse_soi_threshold("2").unwrap() - 2.0).abs() < 1e-12);
        for bad in ["0", "-1", "nan", "inf", "1000", "x"] {
            assert!(
                parse_soi_threshold(bad)
                    .unwrap_err()
                    .contains("--soi-threshold"),
                "{bad}"
            );
        }
    }

    #[test]
    fn api_rate_is_a_whole_number_with_zero_for_off() {
        assert_eq!(parse_api_rate("600").unwrap(), 600);
        assert_eq!(parse_api_rate(" 0 ").unwrap(), 0);
        for bad in ["-1", "1.5", "lots", "", "2000000"] {
            assert!(
                parse_api_rate(bad)
                    .unwrap_err()
                    .contains("MASSLINE_API_RATE_PER_MINUTE"),
                "{bad}"
            );
            assert!(
                parse_page_rate(bad)
                    .unwrap_err()
                    .contains("--page-rate-per-minute"),
                "{bad}"
            );
        }
        assert_eq!(parse_page_rate("120").unwrap(), 120);
        assert_eq!(parse_page_rate("0").unwrap(), 0);
    }

    #[test]
    fn db_path_refuses_empty_and_directories() {
        assert!(parse_db_path("  ").is_err());
        let dir = std::env::temp_dir();
        assert!(
            parse_db_path(dir.to_str().unwrap())
                .unwrap_err()
                .contains("directory")
        );
        assert_eq!(parse_db_path("x.db").unwrap(), PathBuf::from("x.db"));
    }
}
