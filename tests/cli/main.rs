//! Integration tests: the real binary on temporary libraries, one module per command.

mod util;

mod bundle;
mod curation;
mod init;
mod integrity;
mod replay;
mod trade_facts;
