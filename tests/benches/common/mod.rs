//! The observation mix the controller benches replay.
//!
//! An invented node: path loss drifting around 96 dB (a slow random walk
//! between 84 and 110 dB, so the power moves over most of the radio's range),
//! Rayleigh fast fading on top, the far end's noise floor around −117 dBm,
//! with a few packets that are acknowledged without readings, a few beacons
//! and a few records with nothing known. The observations are generated in
//! closed loop with a controller of the same settings, so a fresh controller
//! fed the same sequence takes the same path the generator saw.

use headroom::control::{Controller, ControllerConfig, Observation};
use headroom::sim::{Normal, Pcg32};
use headroom::units::{Db, Dbm};

/// Readings in the window, as in the targets.
pub const W: usize = 32;

/// Observations per pass over the mix.
pub const MIX_LEN: usize = 8192;

/// The settings every controller bench uses.
pub fn config() -> ControllerConfig {
    ControllerConfig::sub_ghz_node()
}

/// A fresh controller with [`config`].
pub fn controller() -> Controller<W> {
    match Controller::<W>::new(config()) {
        Ok(c) => c,
        Err(e) => panic!("bench controller settings refused: {e}"),
    }
}

/// `n` observations of the invented node (seeded, deterministic).
pub fn observation_mix(n: usize) -> Vec<Observation> {
    let mut rng = Pcg32::new(0x6865_6164, 7);
    let mut normal = Normal::new(0x726f_6f6d, 11);
    let mut ctl = controller();
    let required = config().required_snr_db.0;
    let mut loss_db = 96.0_f32;
    let mut out = Vec::with_capacity(n);
    for k in 0..n {
        let t_ms = 1_000 + 250 * k as u64;
        loss_db = (loss_db + 0.3 * normal.sample()).clamp(84.0, 110.0);
        let u = rng.uniform();
        let obs = if u < 0.02 {
            Observation::Acked { t_ms }
        } else if u < 0.03 {
            Observation::Missing { t_ms }
        } else if u < 0.05 {
            // Beacon from the far end at 14 dBm over the same path.
            let fade = 10.0 * (rng.exponential().max(1e-6)).log10();
            Observation::Beacon {
                t_ms,
                beacon_tx: Dbm(14.0),
                rssi: Dbm(14.0 - loss_db + fade),
            }
        } else {
            let tx = ctl.tx();
            let fade = 10.0 * (rng.exponential().max(1e-6)).log10();
            let rssi = tx.0 - loss_db + fade;
            let noise = -117.0 + normal.sample();
            if rssi - noise < required {
                Observation::Lost { t_ms }
            } else {
                let snr = if k % 2 == 0 {
                    Some(Db(rssi - noise))
                } else {
                    None
                };
                Observation::Feedback {
                    t_ms,
                    tx,
                    rssi: Dbm(rssi),
                    noise: Dbm(noise),
                    snr,
                }
            }
        };
        ctl.update(&obs);
        out.push(obs);
    }
    out
}
