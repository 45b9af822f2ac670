//! The per-page checks catch what they are for: each fault is planted in a real page and the
//! check must fail, naming it.

use crate::support::{self, Page, Reading};

/// Plant a fault with `script`, run the page checks, and return their failure message.
async fn failure_after(page: &Page, script: &str, shot: &str) -> String {
    page.script(script).await;
    tokio::time::sleep(std::time::Duration::from_millis(200)).await;
    let checked = page.clone();
    let shot = shot.to_owned();
    let outcome = tokio::spawn(async move { checked.check(&shot).await }).await;
    let panic = outcome.expect_err("the check fails").into_panic();
    panic
        .downcast_ref::<String>()
        .cloned()
        .or_else(|| panic.downcast_ref::<&str>().map(|s| (*s).to_owned()))
        .unwrap_or_default()
}

#[tokio::test(flavor = "multi_thread", worker_threads = 2)]
async fn the_page_checks_fail_on_a_dialog_a_console_error_an_outside_resource_an_unlabelled_field_an_accessibility_fault_and_a_wide_page()
 {
    support::run("j0-checks", Reading::Public, |journey| async move {
        let page = journey.browser("visitor").await;
        page.open("/place", "clean").await;

        let m = failure_after(&page, "setTimeout(() => alert('planted'), 0); return true;", "alert").await;
        assert!(m.contains("a dialog opened"), "{m}");
        page.driver.dismiss_alert().await.expect("the dialog closes");

        page.open("/place", "clean-again").await;
        let m = failure_after(&page, "console.error('planted error'); return true;", "console").await;
        assert!(m.contains("planted error"), "{m}");

        page.open("/place", "clean-3").await;
        let m = failure_after(
            &page,
            "const i = document.createElement('img'); i.src = 'http://example.invalid/x.png'; document.body.append(i); return true;",
            "outside",
        )
        .await;
        assert!(m.contains("img from another origin"), "{m}");
        assert!(m.contains("Content Security Policy"), "the CSP refusal is caught too: {m}");

        page.open("/place", "clean-4").await;
        let m = failure_after(
            &page,
            "const f = document.createElement('input'); f.name = 'distance_mpc'; document.querySelector('form').append(f); \
             const g = document.createElement('label'); g.textContent = 'Distance'; const h = document.createElement('input'); h.name = 'distance'; g.append(h); document.querySelector('form').append(g); return true;",
            "labels",
        )
        .await;
        assert!(m.contains("field without a label: distance_mpc"), "{m}");
        assert!(m.contains("label shows no unit: distance"), "{m}");

        page.open("/place", "clean-5").await;
        let m = failure_after(
            &page,
            "document.querySelector('table, main').insertAdjacentHTML('beforeend', '<table><tr><td class=\"num\" style=\"text-align:left\">1</td></tr></table>'); return true;",
            "alignment",
        )
        .await;
        assert!(m.contains("not right-aligned"), "{m}");

        page.open("/place", "clean-6").await;
        let m = failure_after(
            &page,
            "const p = document.createElement('p'); p.textContent = 'pale words'; p.style.color = '#b0b0b0'; document.querySelector('main').append(p); \
             document.querySelector('header nav').removeAttribute('aria-label'); \
             const b = document.createElement('button'); document.querySelector('main').append(b); \
             const s = document.createElementNS('http://www.w3.org/2000/svg', 'svg'); document.querySelector('main').append(s); \
             document.documentElement.removeAttribute('lang'); return true;",
            "accessibility",
        )
        .await;
        assert!(m.contains("text contrast") && m.contains("pale words"), "{m}");
        assert!(m.contains("navigation without a label"), "{m}");
        assert!(m.contains("button without a name"), "{m}");
        assert!(m.contains("SVG without an accessible name"), "{m}");
        assert!(m.contains("no lang attribute"), "{m}");

        page.open("/place", "clean-7").await;
        let m = failure_after(
            &page,
            "const d = document.createElement('div'); d.textContent = 'wide'; d.style.width = '600px'; document.querySelector('main').append(d); return true;",
            "overflow",
        )
        .await;
        assert!(m.contains("at 390 px: the page is"), "{m}");
        assert!(!m.contains("at 1400 px"), "600 px fit the desktop window: {m}");
    })
    .await;
}
