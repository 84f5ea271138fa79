//! liftledger in a real browser: headless Chromium at phone size, driven over
//! WebDriver, against the app on a fresh demo database.
//!
//! Each test skips (and says so) when Chromium or chromedriver is missing,
//! unless `LIFTLEDGER_REQUIRE_BROWSER=1`, when it fails instead. Screenshots of
//! each final state go to `target/browser-shots/`.

mod app;
mod pages;
#[path = "../suite/raw_sql.rs"]
mod raw_sql;
mod webdriver;

mod api_docs;
mod entry_flow;
mod import_flow;
mod instrument_flow;
mod offline_flow;
mod planning_flow;
mod retest_flow;
mod setup_flow;
