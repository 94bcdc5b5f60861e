//! One module per subcommand: each has its clap `Args` and a `run`.

pub mod ber;
pub mod budget;
pub mod fade;
pub mod noise;
pub mod pathloss;
pub mod rain;
pub mod solve;
pub mod convert;
pub mod replay;
pub mod synth;
pub mod tune;
