//! End-to-end journeys in headless Chromium: each test starts the real server on 127.0.0.1:0
//! with the invented demo catalog, drives Chromium through chromedriver as a person would, and
//! checks every page it visits (see support.rs). Screenshots go to
//! `target/browser-screenshots/`. Without chromium and chromium-driver the tests skip with a
//! loud message, or fail when `MASSLINE_REQUIRE_EXTERNAL=1`.

#[path = "../common/mod.rs"]
mod common;
mod support;

mod checks;

mod api_token;
mod chart_reading;
mod csv_upload;
mod kinematics;
mod phone;
mod place_link;
mod planning;
mod relation_form;
mod review_accept;
mod review_keyboard;
mod review_reject;
mod submit_outlier;
mod tour;
