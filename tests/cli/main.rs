//! Integration tests: the real binary on temporary libraries, one module per command.

mod util;

mod add;
mod import;
mod init;
mod search;
