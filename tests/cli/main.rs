//! Integration tests: the real binary on temporary libraries, one module per command.

mod util;

mod add;
mod bad_input;
mod demo;
mod find;
mod import;
mod init;
mod list;
mod search;
mod show;
mod stats;
