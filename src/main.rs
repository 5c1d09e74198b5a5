//! The `limen` binary: argv in, text and exit codes out. All the work is in
//! the library; each subcommand is a file in cmd/.

mod cmd;

fn main() {
    std::process::exit(cmd::run());
}
