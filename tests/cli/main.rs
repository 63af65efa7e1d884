//! Integration tests: the real binary on temporary libraries, one module per command.

mod util;

mod identify;
mod init;
mod search_science;
mod trade_facts;
