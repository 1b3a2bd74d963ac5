//! The `ampwright` command line; everything it does lives in `host_sim::cli`.

fn main() {
    std::process::exit(host_sim::cli::main(std::env::args_os()));
}
