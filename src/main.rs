//! The `nocoil` command line: glue over the library.
fn main() {}
