//! `kickscan simulate` options.

use clap::Args;

/// Synthesize captures of a coil switched off with a chosen clamp.
#[derive(Args, Debug, Clone)]
pub struct SimulateArgs {
    /// Output file.
    #[arg(long, short)]
    pub out: std::path::PathBuf,
}

/// Runs `kickscan simulate`.
pub fn run(args: SimulateArgs) -> anyhow::Result<std::process::ExitCode> {
    anyhow::bail!(
        "simulate is not built yet (would write {})",
        args.out.display()
    )
}
