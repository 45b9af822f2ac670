//! The `massline` command; its subcommands and their arguments are in `server/cli/`
//! (`massline::cli`, which lists them).

fn main() -> std::process::ExitCode {
    massline::cli::main()
}
