//! Integration tests: the real binary on temporary libraries, one module per command.

mod util;

mod comfort;
mod init;
mod plot;
mod report;
mod trade_facts;
