//! Integration tests: the real binary on temporary libraries, one module per command.

mod util;

mod add;
mod bad_input;
mod bundle;
mod comfort;
mod compound;
mod concurrency;
mod curation;
mod demo;
mod faults;
mod find;
mod formula;
mod fragments;
mod identify;
mod import;
mod init;
mod integrity;
mod list;
mod mixture;
mod plot;
mod recipe;
mod replay;
mod report;
mod search;
mod search_science;
mod serve;
mod serve_api;
mod serve_beside;
mod serve_pages;
mod show;
mod stats;
mod trade_facts;
mod trust;
