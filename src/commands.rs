//! One function per subcommand: the wiring between arguments, library and output.

use anyhow::Result;

use crate::cli::{Cli, Command, SimulateArgs};

pub fn run(cli: Cli) -> Result<()> {
    match cli.command {
        Command::Simulate(args) => simulate(args),
    }
}

fn simulate(_args: SimulateArgs) -> Result<()> {
    anyhow::bail!("simulate is being built")
}
