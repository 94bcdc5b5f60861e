//! One module per subcommand: each has its clap `Args` and a `run`.

pub mod battery;
pub mod ber;
pub mod budget;
pub mod convert;
pub mod fade;
pub mod noise;
pub mod pathloss;
pub mod rain;
pub mod replay;
pub mod solve;
pub mod synth;
pub mod tune;
