//! Integration tests: the real binary on temporary libraries, one module per command.

mod util;

mod formula;
mod fragments;
mod init;
mod trade_facts;
