//! Starting the real server and headless Chromium for one journey, and the checks every page
//! visited gets.
//!
//! [`run`] starts the app on 127.0.0.1:0 with the demo catalog and a `ManualClock` (with the
//! starter the other test crates use, tests/common), starts `/usr/bin/chromedriver` on a free
//! port, runs the journey, and quits every browser session it opened (also when the journey
//! panics) before passing the panic on. [`Page`] is one browser session; [`Page::check`] runs
//! the per-page checks (no dialog open, the document's status, no console errors, no failed
//! requests, no Content-Security-Policy violations, nothing from another origin, every field
//! labelled with numeric fields showing their unit, nothing wider than the window at either
//! width, and the accessibility checks of `static/a11y-check.js`) and writes a screenshot at
//! both widths under `target/browser-screenshots/`.

use std::path::PathBuf;
use std::sync::atomic::{AtomicU32, AtomicUsize, Ordering};
use std::sync::{Arc, Mutex};
use std::time::{Duration, Instant};

use massline::auth::Role;
use massline::auth::clock::ManualClock;
use serde_json::Value;
use sqlx::SqlitePool;
use tempfile::TempDir;
use thirtyfour::LoggingPrefsLogLevel;
use thirtyfour::prelude::*;
use tokio::process::{Child, Command};

pub(crate) use crate::common::TEST_PASSWORD;
use crate::common::{TestApp, spawn_with};

/// Script-injection payloads typed into text fields; none may ever run.
pub(crate) const PAYLOADS: [&str; 2] = [
    "<script>alert(1)</script>",
    "\"><img src=x onerror=alert(1)>",
];

const CHROMEDRIVER: &str = "/usr/bin/chromedriver";
const CHROMIUM: &str = "/usr/bin/chromium";

/// Desktop width: the charts must be legible at it.
pub(crate) const WINDOW_WIDTH: u32 = 1400;
const WINDOW_HEIGHT: u32 = 900;
/// Phone width (and height): no page may be wider than this.
pub(crate) const PHONE_WIDTH: u32 = 390;
pub(crate) const PHONE_HEIGHT: u32 = 844;
/// The accessibility checks every page gets (never served by the app).
const A11Y_SCRIPT: &str = include_str!("../../static/a11y-check.js");
/// Whether the document is wider than the window, naming the elements that reach past it.
const OVERFLOW_SCRIPT: &str = r#"
const width = window.innerWidth;
if (document.documentElement.scrollWidth <= width) return [];
const out = [];
for (const el of document.querySelectorAll('body *')) {
  const r = el.getBoundingClientRect();
  if (r.width > 0 && r.right > width + 0.5 && !(el.parentElement && el.parentElement.getBoundingClientRect().right > width + 0.5)) {
    out.push(el.outerHTML.replace(/\s+/g, ' ').slice(0, 90));
    if (out.length >= 5) break;
  }
}
return ['the page is ' + document.documentElement.scrollWidth + ' px wide in a window of ' + width + ' px; past the edge: ' + out.join(' | ')];
"#;
/// Full-page screenshots stop at this height.
const MAX_SHOT_HEIGHT: u32 = 7000;

/// Whether the journey's server lets visitors read without logging in.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub(crate) enum Reading {
    /// `--public-read`.
    Public,
    /// As deployed by default.
    Private,
}

/// One journey: the server, the WebDriver process and the browser sessions.
pub(crate) struct Journey {
    /// Short name, the prefix of its screenshots.
    pub(crate) name: &'static str,
    /// e.g. "http://127.0.0.1:41234".
    pub(crate) address: String,
    /// The app's pool, for arranging accounts and inspecting what was written.
    pub(crate) pool: SqlitePool,
    webdriver_url: String,
    sessions: Mutex<Vec<WebDriver>>,
    shots: AtomicUsize,
    profiles: TempDir,
    _clock: Arc<ManualClock>,
    _db_dir: TempDir,
}

/// Whether chromium and chromium-driver are installed; without them the suite skips loudly,
/// unless `MASSLINE_REQUIRE_EXTERNAL=1` (CI), where it fails.
fn browser_installed() -> bool {
    let present =
        std::path::Path::new(CHROMEDRIVER).exists() && std::path::Path::new(CHROMIUM).exists();
    if !present {
        let message = "SKIPPED: browser tests need chromium and chromium-driver (apt-get install chromium chromium-driver)";
        if crate::common::external_required() {
            panic!("{message}; MASSLINE_REQUIRE_EXTERNAL=1 makes this a failure");
        }
        loud(message);
    }
    present
}

pub(crate) use crate::common::loud;

/// Where screenshots go: `target/browser-screenshots/`.
pub(crate) fn screenshot_dir() -> PathBuf {
    let tmp = PathBuf::from(env!("CARGO_TARGET_TMPDIR"));
    tmp.parent()
        .map_or(tmp.clone(), PathBuf::from)
        .join("browser-screenshots")
}

/// Run one journey against a fresh server with the demo catalog; every browser session the
/// journey opens is quit afterwards, also when it panics, and the panic is passed on.
pub(crate) async fn run<F, Fut>(name: &'static str, reading: Reading, body: F)
where
    F: FnOnce(Arc<Journey>) -> Fut,
    Fut: Future<Output = ()> + Send + 'static,
{
    if !browser_installed() {
        return;
    }
    let TestApp {
        address,
        pool,
        clock,
        dir: db_dir,
        ..
    } = spawn_with(|s| {
        s.demo = true;
        s.public_read = reading == Reading::Public;
    })
    .await;

    let (webdriver_url, mut process) = start_chromedriver().await;
    let dir = screenshot_dir();
    std::fs::create_dir_all(&dir).expect("the screenshot directory can be made");
    // Screenshots of an earlier run of this journey would mislead whoever looks at them.
    if let Ok(entries) = std::fs::read_dir(&dir) {
        for e in entries.flatten() {
            if e.file_name()
                .to_string_lossy()
                .starts_with(&format!("{name}-"))
            {
                let _ = std::fs::remove_file(e.path());
            }
        }
    }
    let journey = Arc::new(Journey {
        name,
        address,
        pool,
        webdriver_url,
        sessions: Mutex::new(Vec::new()),
        shots: AtomicUsize::new(0),
        profiles: tempfile::tempdir().expect("a temporary directory"),
        _clock: clock,
        _db_dir: db_dir,
    });
    let outcome = tokio::spawn(body(journey.clone())).await;
    let sessions: Vec<WebDriver> =
        std::mem::take(&mut *journey.sessions.lock().expect("not poisoned"));
    for session in sessions {
        if let Err(e) = session.quit().await {
            eprintln!("{name}: quitting a browser session failed: {e}");
        }
    }
    let _ = process.kill().await;
    if let Err(e) = outcome {
        match e.try_into_panic() {
            Ok(panic) => std::panic::resume_unwind(panic),
            Err(e) => panic!("{name}: the journey did not finish: {e}"),
        }
    }
}

async fn start_chromedriver() -> (String, Child) {
    let port = {
        let listener = std::net::TcpListener::bind("127.0.0.1:0").expect("a free port");
        listener.local_addr().expect("its address").port()
    };
    let process = Command::new(CHROMEDRIVER)
        .arg(format!("--port={port}"))
        .stdout(std::process::Stdio::null())
        .stderr(std::process::Stdio::null())
        .kill_on_drop(true)
        .spawn()
        .expect("chromedriver starts");
    let url = format!("http://127.0.0.1:{port}");
    let client = reqwest::Client::new();
    let started = Instant::now();
    loop {
        if let Ok(r) = client.get(format!("{url}/status")).send().await
            && r.status().is_success()
        {
            break;
        }
        assert!(
            started.elapsed() < Duration::from_secs(20),
            "chromedriver did not answer on {url} within 20 s"
        );
        tokio::time::sleep(Duration::from_millis(50)).await;
    }
    (url, process)
}

impl Journey {
    /// Create an account directly (as `massline user add` would) with [`TEST_PASSWORD`];
    /// returns its key.
    pub(crate) async fn account(&self, username: &str, role: Role) -> i64 {
        crate::common::create_account(&self.pool, username, role).await
    }

    /// Open a new browser session (its own profile: no shared cookies); `who` names it in
    /// screenshots.
    pub(crate) async fn browser(self: &Arc<Self>, who: &'static str) -> Page {
        let n = self.sessions.lock().expect("not poisoned").len();
        let profile = self.profiles.path().join(format!("profile-{n}"));
        let mut caps = DesiredCapabilities::chrome();
        caps.set_binary(CHROMIUM).expect("capability");
        for a in [
            "--headless",
            "--no-sandbox",
            "--disable-gpu",
            "--disable-dev-shm-usage",
            "--disable-quic",
            "--no-first-run",
            "--disable-background-networking",
            "--disable-component-update",
            "--disable-sync",
            "--disable-extensions",
            "--hide-scrollbars",
            "--force-device-scale-factor=1",
        ] {
            caps.add_arg(a).expect("capability");
        }
        caps.add_arg(&format!("--window-size={WINDOW_WIDTH},{WINDOW_HEIGHT}"))
            .expect("capability");
        caps.add_arg(&format!("--user-data-dir={}", profile.display()))
            .expect("capability");
        caps.set_browser_log_level(LoggingPrefsLogLevel::All)
            .expect("capability");
        // Leave an opened dialog open, so the check after each page sees it.
        caps.set("unhandledPromptBehavior", "ignore")
            .expect("capability");
        let driver = WebDriver::new(&self.webdriver_url, caps)
            .await
            .expect("a Chromium session starts");
        self.sessions
            .lock()
            .expect("not poisoned")
            .push(driver.clone());
        Page {
            driver,
            journey: self.clone(),
            who,
            width: Arc::new(AtomicU32::new(WINDOW_WIDTH)),
        }
    }
}

/// One browser session in a journey.
#[derive(Clone)]
pub(crate) struct Page {
    /// The WebDriver session.
    pub(crate) driver: WebDriver,
    journey: Arc<Journey>,
    who: &'static str,
    /// The window's width the journey reads at (the checks visit the other width and return).
    width: Arc<AtomicU32>,
}

/// What the page-wide script finds wrong (see `PAGE_SCRIPT`).
const PAGE_SCRIPT: &str = r#"
const problems = [];
const here = location.origin;
const nav = performance.getEntriesByType('navigation')[0];
const status = nav ? nav.responseStatus : 0;
for (const e of performance.getEntriesByType('resource')) {
  if (new URL(e.name).origin !== here) problems.push('loaded from another origin: ' + e.name);
  else if (e.responseStatus >= 400) problems.push('request failed (' + e.responseStatus + '): ' + e.name);
}
for (const el of document.querySelectorAll('link[href], script[src], img[src], iframe[src], source[src], video[src], audio[src], object[data], embed[src]')) {
  const url = el.getAttribute('href') ?? el.getAttribute('src') ?? el.getAttribute('data');
  // `data:,` is the empty icon base.html names so browsers do not ask for /favicon.ico.
  if (url === 'data:,') continue;
  if (new URL(url, location.href).origin !== here) problems.push(el.tagName.toLowerCase() + ' from another origin: ' + url);
}
if (/[<>]/.test(document.title)) problems.push('markup in the page title: ' + document.title);
for (const el of document.querySelectorAll('[style*="url("]')) problems.push('inline style with a url: ' + el.outerHTML.slice(0, 80));
const unitWords = /\[[^\]]+\]|\b(Mpc|km\/s|arcsec|dex|log10)\b|M☉|L☉|σ\b/;
const numericName = /(^|_)(value|mass|sigma|distance|luminosity|pivot\d?|resolution|mpc|arcsec|dex)$/;
for (const el of document.querySelectorAll('input, select, textarea')) {
  if (el.type === 'hidden') continue;
  let text = '';
  if (el.labels) for (const l of el.labels) text += ' ' + l.textContent;
  if (el.getAttribute('aria-label')) text += ' ' + el.getAttribute('aria-label');
  for (const id of (el.getAttribute('aria-labelledby') || '').split(/\s+/).filter(Boolean)) {
    const t = document.getElementById(id); if (t) text += ' ' + t.textContent;
  }
  text = text.replace(/\s+/g, ' ').trim();
  const name = el.name || el.id || el.outerHTML.slice(0, 80);
  if (!text) { problems.push('field without a label: ' + name); continue; }
  const numeric = el.tagName === 'INPUT' && (el.type === 'number' || el.type === 'range'
    || ['decimal', 'numeric'].includes(el.inputMode) || numericName.test(el.name));
  if (numeric && !unitWords.test(text)) problems.push('numeric field whose label shows no unit: ' + name + ' ("' + text + '")');
}
for (const td of document.querySelectorAll('td.num, th.num')) {
  const s = getComputedStyle(td);
  if (s.textAlign !== 'right') problems.push('numeric cell not right-aligned: ' + td.outerHTML.slice(0, 80));
  if (!s.fontVariantNumeric.includes('tabular-nums')) problems.push('numeric cell without tabular figures: ' + td.outerHTML.slice(0, 80));
}
return { status, problems, url: location.href };
"#;

impl Page {
    /// Open a path and check the page (status 200).
    pub(crate) async fn open(&self, path: &str, shot: &str) {
        self.open_expecting(path, 200, shot).await;
    }

    /// Open a path and check the page, expecting the document's status.
    pub(crate) async fn open_expecting(&self, path: &str, status: u16, shot: &str) {
        self.driver
            .goto(format!("{}{path}", self.journey.address))
            .await
            .unwrap_or_else(|e| panic!("{}: opening {path} failed: {e}", self.who));
        self.check_expecting(status, shot).await;
    }

    /// Open a full URL (e.g. one copied from another session) and check the page.
    pub(crate) async fn open_url(&self, url: &str, shot: &str) {
        self.driver
            .goto(url)
            .await
            .unwrap_or_else(|e| panic!("{}: opening {url} failed: {e}", self.who));
        self.check(shot).await;
    }

    /// Check the current page (status 200) and take its screenshot.
    pub(crate) async fn check(&self, shot: &str) {
        self.check_expecting(200, shot).await;
    }

    /// The checks every page visited gets, then its screenshot:
    /// no dialog is open (an injected script would open one); the document answered `status`;
    /// the console has no error and no Content-Security-Policy message (a failed request of
    /// the page's own document with the expected status excepted); no resource failed or came
    /// from another origin; every field has a label and numeric fields show their unit;
    /// numeric cells are right-aligned with tabular figures.
    pub(crate) async fn check_expecting(&self, status: u16, shot: &str) {
        let who = self.who;
        if let Ok(text) = self.driver.get_alert_text().await {
            panic!("{who} on {shot}: a dialog opened with “{text}”: typed text ran as script");
        }
        let found = self
            .driver
            .execute(PAGE_SCRIPT, Vec::new())
            .await
            .unwrap_or_else(|e| panic!("{who} on {shot}: the page checks could not run: {e}"));
        let found = found.json().clone();
        let url = found["url"].as_str().unwrap_or("").to_owned();
        let mut problems: Vec<String> = found["problems"]
            .as_array()
            .map(|a| {
                a.iter()
                    .filter_map(|v| v.as_str().map(str::to_owned))
                    .collect()
            })
            .unwrap_or_default();
        let got = found["status"].as_u64().unwrap_or(0);
        if got != u64::from(status) {
            problems.push(format!("the page answered {got}, expected {status}"));
        }
        let expected_failure = format!("the server responded with a status of {status}");
        for entry in
            self.driver.browser_log().await.unwrap_or_else(|e| {
                panic!("{who} on {shot}: the browser log could not be read: {e}")
            })
        {
            let csp = entry.message.contains("Content Security Policy")
                || entry.message.contains("Content-Security-Policy");
            let own_document = status != 200
                && entry.message.starts_with(&url)
                && entry.message.contains(&expected_failure);
            if csp || (entry.level == "SEVERE" && !own_document) {
                problems.push(format!("console {}: {}", entry.level, entry.message));
            }
        }
        for p in self.script_list(A11Y_SCRIPT).await {
            problems.push(format!("accessibility: {p}"));
        }
        problems.extend(self.screenshots(shot).await);
        assert!(
            problems.is_empty(),
            "{who} on {shot} ({url}):\n  {}",
            problems.join("\n  ")
        );
    }

    /// Read the page at phone width from now on (390 × 844), or back at desktop width.
    pub(crate) async fn set_phone(&self, phone: bool) {
        let (w, h) = if phone {
            (PHONE_WIDTH, PHONE_HEIGHT)
        } else {
            (WINDOW_WIDTH, WINDOW_HEIGHT)
        };
        self.width.store(w, Ordering::SeqCst);
        self.driver
            .set_window_rect(0, 0, w, h)
            .await
            .unwrap_or_else(|e| panic!("{}: the window cannot be resized: {e}", self.who));
    }

    /// A script's list of sentences.
    async fn script_list(&self, js: &str) -> Vec<String> {
        self.script(js)
            .await
            .as_array()
            .map(|a| {
                a.iter()
                    .filter_map(|v| v.as_str().map(str::to_owned))
                    .collect()
            })
            .unwrap_or_default()
    }

    /// Full-page screenshots at both widths,
    /// `target/browser-screenshots/<journey>-<n>-<who>-<shot>-<width>.png`, checking at each
    /// width that the document is no wider than the window; returns what is too wide. The
    /// window is back at the journey's width afterwards.
    async fn screenshots(&self, shot: &str) -> Vec<String> {
        let n = self.journey.shots.fetch_add(1, Ordering::SeqCst) + 1;
        let current = self.width.load(Ordering::SeqCst);
        let mut problems = Vec::new();
        for (w, h) in [(WINDOW_WIDTH, WINDOW_HEIGHT), (PHONE_WIDTH, PHONE_HEIGHT)] {
            if self.driver.set_window_rect(0, 0, w, h).await.is_err() {
                problems.push(format!("the window could not be made {w} px wide"));
                continue;
            }
            let inner = self.script("return window.innerWidth;").await.as_u64();
            if inner != Some(u64::from(w)) {
                problems.push(format!("the window is {inner:?} px wide inside, not {w}"));
            }
            for p in self.script_list(OVERFLOW_SCRIPT).await {
                problems.push(format!("at {w} px: {p}"));
            }
            self.screenshot(
                &format!("{}-{n:02}-{}-{shot}-{w}.png", self.journey.name, self.who),
                w,
                h,
            )
            .await;
        }
        let h = if current == PHONE_WIDTH {
            PHONE_HEIGHT
        } else {
            WINDOW_HEIGHT
        };
        let _ = self.driver.set_window_rect(0, 0, current, h).await;
        problems
    }

    /// A full-page screenshot at the window's width `w` (and height `h`), up to
    /// `MAX_SHOT_HEIGHT` high.
    async fn screenshot(&self, file: &str, w: u32, h: u32) {
        // The window's height that shows the whole document: its height plus what the
        // browser itself takes of the window.
        let height = self
            .driver
            .execute(
                "return Math.ceil(document.documentElement.scrollHeight + window.outerHeight - window.innerHeight);",
                Vec::new(),
            )
            .await
            .ok()
            .and_then(|r| r.json().as_u64())
            .and_then(|h| u32::try_from(h).ok())
            .unwrap_or(h)
            .clamp(h, MAX_SHOT_HEIGHT);
        if height > h {
            let _ = self.driver.set_window_rect(0, 0, w, height).await;
        }
        let path = screenshot_dir().join(file);
        if let Err(e) = self.driver.screenshot(&path).await {
            eprintln!("screenshot {} failed: {e}", path.display());
        }
    }

    /// The current address.
    pub(crate) async fn url(&self) -> String {
        self.driver
            .current_url()
            .await
            .expect("an address")
            .to_string()
    }

    /// The text of the first element matching a CSS selector (panics when there is none).
    pub(crate) async fn text(&self, css: &str) -> String {
        self.driver
            .find(By::Css(css))
            .await
            .unwrap_or_else(|e| panic!("{}: no element {css} on {}: {e}", self.who, self.who))
            .text()
            .await
            .expect("its text")
    }

    /// The texts of every element matching a CSS selector.
    pub(crate) async fn texts(&self, css: &str) -> Vec<String> {
        let mut out = Vec::new();
        for e in self.driver.find_all(By::Css(css)).await.expect("a query") {
            out.push(e.text().await.expect("its text"));
        }
        out
    }

    /// How many elements match a CSS selector.
    pub(crate) async fn count(&self, css: &str) -> usize {
        self.driver
            .find_all(By::Css(css))
            .await
            .expect("a query")
            .len()
    }

    /// The element matching a CSS selector (panics when there is none).
    pub(crate) async fn element(&self, css: &str) -> WebElement {
        self.driver
            .find(By::Css(css))
            .await
            .unwrap_or_else(|e| panic!("{}: no element {css}: {e}", self.who))
    }

    /// Run a script and return its value.
    pub(crate) async fn script(&self, js: &str) -> Value {
        self.driver
            .execute(js, Vec::new())
            .await
            .unwrap_or_else(|e| panic!("{}: script failed: {e}", self.who))
            .json()
            .clone()
    }

    /// Mark the current document, do `action`, and wait until a new document has loaded
    /// (a form sent with Enter does not make WebDriver wait by itself).
    pub(crate) async fn navigating<Fut: Future<Output = ()>>(&self, action: Fut) {
        self.script("document.documentElement.dataset.mlOld = '1'; return true;")
            .await;
        action.await;
        let started = Instant::now();
        loop {
            let ready = self
                .driver
                .execute(
                    "return document.readyState === 'complete' && !document.documentElement.dataset.mlOld;",
                    Vec::new(),
                )
                .await
                .ok()
                .and_then(|r| r.json().as_bool())
                .unwrap_or(false);
            if ready {
                return;
            }
            assert!(
                started.elapsed() < Duration::from_secs(30),
                "{}: no new page within 30 s",
                self.who
            );
            tokio::time::sleep(Duration::from_millis(40)).await;
        }
    }

    /// Press Tab until the element matching `css` has the focus (keyboard only; panics when
    /// it is not reachable within 300 presses).
    pub(crate) async fn tab_to(&self, css: &str) {
        let probe = format!(
            "return document.activeElement !== null && document.activeElement.matches({});",
            serde_json::to_string(css).expect("a string")
        );
        for _ in 0..300 {
            if self.script(&probe).await.as_bool() == Some(true) {
                return;
            }
            self.press(Key::Tab).await;
        }
        panic!("{}: {css} cannot be reached with the Tab key", self.who);
    }

    /// Type text into whatever has the focus.
    pub(crate) async fn type_text(&self, text: &str) {
        self.driver
            .action_chain()
            .send_keys(text)
            .perform()
            .await
            .expect("typing works");
    }

    /// Press one key.
    pub(crate) async fn press(&self, key: Key) {
        self.driver
            .action_chain()
            .send_keys(key)
            .perform()
            .await
            .expect("a key press works");
    }

    /// Press keys together (a chord such as Shift+Tab), then release them.
    pub(crate) async fn driver_keys(&self, keys: &[Key]) {
        let mut chain = self.driver.action_chain();
        for key in keys {
            chain = chain.key_down(key.clone());
        }
        for key in keys.iter().rev() {
            chain = chain.key_up(key.clone());
        }
        chain.perform().await.expect("a chord of keys works");
    }

    /// Tab to a field, select what it holds and type over it.
    pub(crate) async fn tab_and_type(&self, css: &str, text: &str) {
        self.tab_to(css).await;
        self.script("const e = document.activeElement; if (e.select) e.select(); return true;")
            .await;
        self.type_text(text).await;
    }

    /// Tab to a button (or field) and press Enter; waits for the next page.
    pub(crate) async fn tab_and_enter(&self, css: &str) {
        self.tab_to(css).await;
        self.navigating(self.press(Key::Enter)).await;
    }

    /// Log in with the keyboard alone: Tab to each field, type, Enter; checks both pages.
    pub(crate) async fn log_in_by_keyboard(&self, username: &str, password: &str) {
        self.open("/login", "login").await;
        self.tab_and_type("input[name=username]", username).await;
        self.press(Key::Tab).await;
        self.type_text(password).await;
        self.navigating(self.press(Key::Enter)).await;
        self.check("after-login").await;
        let nav = self.text("header nav.session").await;
        assert!(
            nav.contains(username),
            "{}: after logging in the header does not name {username}: {nav}",
            self.who
        );
    }

    /// Set a field's value, replacing what it held: text fields get WebDriver's element
    /// typing, selects the option whose value is `text`. (The keyboard-only helpers are
    /// `tab_to`, `tab_and_type` and `tab_and_enter`.)
    pub(crate) async fn fill(&self, css: &str, text: &str) {
        let el = self.element(css).await;
        if el.tag_name().await.expect("a tag") == "select" {
            let mut chosen = None;
            for option in el.find_all(By::Css("option")).await.expect("a query") {
                if option.prop("value").await.expect("a value").as_deref() == Some(text) {
                    chosen = Some(option);
                    break;
                }
            }
            chosen
                .unwrap_or_else(|| panic!("{}: {css} has no option {text}", self.who))
                .click()
                .await
                .expect("an option can be chosen");
        } else {
            el.clear().await.expect("the field can be cleared");
            el.send_keys(text).await.expect("typing works");
        }
    }
}

/// A galaxy of the demo catalog whose adopted black-hole mass is planted far off the M–σ
/// relation (its row's note says so), read from the demo files so a regenerated demo still
/// works.
#[derive(Clone, Debug)]
pub(crate) struct DemoGalaxy {
    /// Its name.
    pub(crate) name: String,
    /// Its slug (the galaxy page's address).
    pub(crate) slug: String,
    /// The distance its mass's source assumed, as typed (Mpc).
    pub(crate) source_distance_mpc: String,
}

/// The demo galaxies whose black-hole mass is a planted outlier and which have σ_e, in file
/// order.
pub(crate) fn planted_outliers() -> Vec<DemoGalaxy> {
    let mut reader =
        csv::Reader::from_reader(massline::catalog::demo::DEMO_MEASUREMENTS_CSV.as_bytes());
    let headers = reader.headers().expect("a header").clone();
    let col = |name: &str| {
        headers
            .iter()
            .position(|h| h == name)
            .expect("a demo column")
    };
    let rows: Vec<csv::StringRecord> = reader.records().map(|r| r.expect("a demo row")).collect();
    let (galaxy, quantity, note, distance, definition) = (
        col("galaxy"),
        col("quantity"),
        col("note"),
        col("source_distance_mpc"),
        col("sigma_definition"),
    );
    rows.iter()
        .filter(|r| &r[quantity] == "bh_mass" && r[note].contains("planted outlier"))
        .filter_map(|m| {
            // M–σ places only galaxies with σ_e.
            rows.iter().find(|s| {
                s[galaxy] == m[galaxy] && &s[quantity] == "sigma" && &s[definition] == "sigma_e"
            })?;
            Some(DemoGalaxy {
                name: m[galaxy].to_owned(),
                slug: massline::catalog::model::slugify(&m[galaxy]),
                source_distance_mpc: m[distance].to_owned(),
            })
        })
        .collect()
}

/// A black-hole mass to submit for a galaxy through `/submissions/new`.
pub(crate) struct MassSubmission<'a> {
    /// The galaxy.
    pub(crate) galaxy: &'a DemoGalaxy,
    /// The value as typed, in M☉.
    pub(crate) value: &'a str,
    /// The reference field.
    pub(crate) reference: &'a str,
    /// The note to the reviewer.
    pub(crate) note: &'a str,
}

impl Page {
    /// Fill `/submissions/new` with one black-hole mass for an existing galaxy (the page must
    /// be open), leaving the sending to the caller.
    pub(crate) async fn fill_mass_submission(&self, s: &MassSubmission<'_>) {
        // The picker takes the galaxy's name as typed (its list suggests names).
        self.fill("input[name=galaxy]", &s.galaxy.name).await;
        self.fill("select[name=m0_quantity]", "bh_mass").await;
        self.fill("input[name=m0_value]", s.value).await;
        self.fill("select[name=m0_method_bh]", "stellar_dynamics")
            .await;
        self.fill(
            "input[name=m0_source_distance_mpc]",
            &s.galaxy.source_distance_mpc,
        )
        .await;
        self.fill("input[name=m0_resolution_arcsec]", "0.05").await;
        self.fill("input[name=m0_reference]", s.reference).await;
        self.fill("textarea[name=note]", s.note).await;
    }

    /// Click the button of `form_css` whose text contains `text` and wait for the next page.
    pub(crate) async fn click_button(&self, form_css: &str, text: &str) {
        let mut target = None;
        for b in self
            .driver
            .find_all(By::Css(format!("{form_css} button")))
            .await
            .expect("a query")
        {
            if b.text().await.expect("its text").contains(text) {
                target = Some(b);
                break;
            }
        }
        let button =
            target.unwrap_or_else(|| panic!("{}: no button “{text}” in {form_css}", self.who));
        self.navigating(async {
            button.click().await.expect("a click works");
        })
        .await;
    }

    /// Submit one black-hole mass through `/submissions/new` (logged in as a member); returns
    /// the new submission's number, read from the address it lands on.
    pub(crate) async fn submit_mass(&self, s: &MassSubmission<'_>) -> i64 {
        self.open("/submissions/new", "submission-form").await;
        self.fill_mass_submission(s).await;
        self.click_button("#submission-form", "Submit for review")
            .await;
        self.check("submission-sent").await;
        let url = self.url().await;
        url.rsplit('/')
            .next()
            .and_then(|id| id.parse().ok())
            .unwrap_or_else(|| {
                panic!(
                    "{}: the submission did not land on its page: {url}",
                    self.who
                )
            })
    }

    /// The value shown beside a `<dt>` with this text in a `dl.facts` or `dl.stats` list.
    pub(crate) async fn fact(&self, term: &str) -> String {
        let js = format!(
            "for (const d of document.querySelectorAll('dl div')) {{ const t = d.querySelector('dt'); if (t && t.textContent.trim() === {}) return d.querySelector('dd').textContent.trim(); }} return null;",
            serde_json::to_string(term).expect("a string")
        );
        self.script(&js)
            .await
            .as_str()
            .unwrap_or_else(|| panic!("{}: no fact “{term}” on the page", self.who))
            .to_owned()
    }
}

/// A number as the pages print it (true minus sign) read back.
pub(crate) fn number(text: &str) -> f64 {
    let t = text.trim().replace('−', "-");
    t.split_whitespace()
        .next()
        .and_then(|w| w.parse().ok())
        .unwrap_or_else(|| panic!("not a number: “{text}”"))
}
