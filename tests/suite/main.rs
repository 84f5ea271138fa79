//! liftledger's integration tests: one binary, real SQLite files, real servers on loopback.

mod helpers;
mod raw_sql;

mod access;
mod api_flow;
mod backup;
mod bad_input;
mod calculators;
mod certificates;
mod concurrency;
mod deploy;
mod edge;
mod entry_paths;
mod generate;
mod idempotency;
mod import_audit;
mod import_page;
mod instruments;
mod lot_paging;
mod openapi;
mod operations;
mod pages;
mod planning;
mod readings;
mod restart;
mod setup_pages;
mod shared_postgres;
mod signoff;
mod summaries;
mod transfer;
mod verdicts;
