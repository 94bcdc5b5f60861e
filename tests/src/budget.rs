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
