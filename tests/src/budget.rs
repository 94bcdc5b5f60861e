//! f64 reference: line-item link budget, written from the definitions
//! (powers in dB add along the chain; N = k·T·B with T = Ta + (F − 1)·T0).

/// Boltzmann constant, J/K (exact in the 2019 SI).
pub const K_BOLTZMANN: f64 = 1.380_649e-23;
/// Reference temperature for noise figure, K (IEEE definition of noise figure).
pub const T0: f64 = 290.0;

/// Inputs of a budget, all plain numbers.
#[derive(Debug, Clone)]
pub struct RefLink {
    /// Transmitter output, dBm.
    pub tx_dbm: f64,
    /// Gains on the transmitter side, dB (losses negative).
    pub tx_gains_db: Vec<f64>,
    /// Modelled path loss, dB (positive).
    pub path_loss_db: f64,
    /// Other gains along the path, dB.
    pub path_gains_db: Vec<f64>,
    /// Gains on the receiver side, dB.
    pub rx_gains_db: Vec<f64>,
    /// Noise bandwidth, Hz.
    pub bandwidth_hz: f64,
    /// Noise figure, dB.
    pub noise_figure_db: f64,
    /// Antenna temperature, K (None: T0).
    pub antenna_k: Option<f64>,
    /// Required C/N, dB.
    pub required_cn_db: f64,
    /// Fade allowance, dB.
    pub fade_db: f64,
}

/// Outputs of the reference budget.
#[derive(Debug, Clone, Copy)]
pub struct RefBudget {
    /// EIRP, dBm.
    pub eirp_dbm: f64,
    /// Received power, dBm.
    pub rx_dbm: f64,
    /// Noise power, dBm.
    pub noise_dbm: f64,
    /// C/N, dB.
    pub cn_db: f64,
    /// Margin, dB.
    pub margin_db: f64,
}

/// Evaluate the reference budget.
pub fn evaluate(l: &RefLink) -> RefBudget {
    let eirp = l.tx_dbm + l.tx_gains_db.iter().sum::<f64>();
    let rx = eirp - l.path_loss_db
        + l.path_gains_db.iter().sum::<f64>()
        + l.rx_gains_db.iter().sum::<f64>();
    let f_lin = 10f64.powf(l.noise_figure_db / 10.0);
    let t_sys = l.antenna_k.unwrap_or(T0) + (f_lin - 1.0) * T0;
    let noise_w = K_BOLTZMANN * t_sys * l.bandwidth_hz;
    let noise_dbm = 10.0 * (noise_w / 1e-3).log10();
    let cn = rx - noise_dbm;
    RefBudget {
        eirp_dbm: eirp,
        rx_dbm: rx,
        noise_dbm,
        cn_db: cn,
        margin_db: cn - l.required_cn_db - l.fade_db,
    }
}

/// One stage of a receive chain, for [`system_temperature_k`].
#[derive(Debug, Clone, Copy)]
pub enum RefStage {
    /// A passive loss `loss_db` (positive) at physical temperature `temperature_k`.
    Passive {
        /// Loss, dB.
        loss_db: f64,
        /// Physical temperature, K.
        temperature_k: f64,
    },
    /// An amplifier.
    Amplifier {
        /// Gain, dB.
        gain_db: f64,
        /// Noise figure, dB.
        noise_figure_db: f64,
    },
}

/// System noise temperature at the receiver input (after the chain), walking
/// the chain from the antenna towards the receiver with output-referred
/// noise temperatures: an attenuator of loss L at temperature Tp passes
/// `T/L + Tp·(1 − 1/L)` (the thermal-equilibrium argument: a matched load at
/// Tp behind it sees Tp), an amplifier of gain G and noise figure F gives
/// `G·(T + T0·(F − 1))`; the receiver adds its own `T0·(F − 1)` at its input.
/// Written from those definitions, not from the engine's input-referred sum.
pub fn system_temperature_k(antenna_k: f64, chain: &[RefStage], receiver_nf_db: f64) -> f64 {
    let mut t = antenna_k;
    for s in chain {
        t = match *s {
            RefStage::Passive {
                loss_db,
                temperature_k,
            } => {
                let l = 10f64.powf(loss_db / 10.0);
                t / l + temperature_k * (1.0 - 1.0 / l)
            }
            RefStage::Amplifier {
                gain_db,
                noise_figure_db,
            } => {
                let g = 10f64.powf(gain_db / 10.0);
                let te = T0 * (10f64.powf(noise_figure_db / 10.0) - 1.0);
                g * (t + te)
            }
        };
    }
    t + T0 * (10f64.powf(receiver_nf_db / 10.0) - 1.0)
}
