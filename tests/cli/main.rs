//! Integration tests: the real binary on temporary libraries, one module per command.

mod util;

mod curation;
mod init;
mod integrity;
mod trade_facts;
