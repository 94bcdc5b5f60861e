//! The line-item link budget and its inverse problems.
//!
//! A [`Link`] holds a transmit power, at most `N` named gains and losses on
//! the transmitter side, the path and the receiver side, the propagation loss
//! of the path, the receiver's noise, and a requirement. [`Link::evaluate`]
//! walks the chain and gives EIRP, received power, noise power, C/N, C/N0,
//! Eb/N0 and the margin left over the requirement plus the fade allowance.
//!
//! Every quantity is in decibels, so the chain is a sum: gains add, losses
//! subtract (common practice). The inverse problems are therefore exact
//! shifts: the transmit power that leaves a target margin is the present one
//! plus (target − margin); the largest tolerable path loss is the present one
//! plus (margin − target). The range comes from inverting a path-loss model
//! ([`crate::propagation::PathLossModel::range_for_loss`]).

use core::fmt;

use heapless::{String, Vec};

use crate::error::{finite, non_negative, positive, probability, Error};
use crate::fading::{margin_for_availability, FadingModel};
use crate::modulation::{required_ebn0, Modulation};
use crate::noise::{noise_temperature_from_figure, thermal_noise, T0_K};
use crate::propagation::PathLossModel;
use crate::units::{Db, Dbm, Hertz, Kelvin, Metres};

/// Longest name of a line item, in bytes.
pub const ITEM_NAME_LEN: usize = 32;

/// Where in the chain a line item sits.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub enum Side {
    /// Between the transmitter output and the radiated wave (cable, antenna gain): counts in EIRP.
    Transmitter,
    /// Along the path, beside the modelled path loss (rain, foliage, body, wall).
    Path,
    /// Between the wave and the receiver input (antenna gain, cable, filter).
    Receiver,
}

impl Side {
    /// Lower-case name used in files and JSON.
    pub fn as_str(self) -> &'static str {
        match self {
            Side::Transmitter => "tx",
            Side::Path => "path",
            Side::Receiver => "rx",
        }
    }
}

/// How a receive-side line item adds noise.
///
/// The receive-side items, in their listed order, form the receive chain:
/// first the antenna gains ([`ItemNoise::None`], before the antenna
/// terminals), then passive losses and amplifiers, then the receiver with
/// its [`NoiseSpec::noise_figure`]. Transmitter- and path-side items are
/// always [`ItemNoise::None`].
#[derive(Debug, Clone, Copy, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub enum ItemNoise {
    /// No noise of its own: an antenna gain, or any transmitter- or
    /// path-side item.
    None,
    /// A passive loss at a physical temperature: its equivalent input noise
    /// temperature is `T·(L − 1)` (common practice; e.g. Pozar, Microwave
    /// Engineering, §10.1, attenuator noise temperature).
    Passive {
        /// Physical temperature of the lossy item (290 K when not known).
        temperature: Kelvin,
    },
    /// An amplifier of the item's gain and this noise figure.
    Amplifier {
        /// Noise figure of the amplifier.
        noise_figure: Db,
    },
}

/// One named gain (positive) or loss (negative gain) of the chain.
#[derive(Debug, Clone, PartialEq)]
pub struct LineItem {
    /// Name shown in reports ("feeder cable", "dipole").
    pub name: String<ITEM_NAME_LEN>,
    /// Where it sits.
    pub side: Side,
    /// Gain in dB; a loss is negative.
    pub gain: Db,
    /// How it adds noise (receive side only).
    pub noise: ItemNoise,
}

/// What the receiver needs to decode.
#[derive(Debug, Clone, Copy, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub enum Requirement {
    /// A required carrier-to-noise ratio in the noise bandwidth (a demodulator's
    /// data-sheet SNR, for example).
    CarrierToNoise(Db),
    /// A required Eb/N0 at a bit rate.
    EbN0 {
        /// Required Eb/N0.
        ebn0: Db,
        /// Bit rate, bit/s.
        bit_rate_bps: f32,
    },
    /// A modulation and a target bit error rate at a bit rate: the engine
    /// finds the Eb/N0 ([`crate::modulation::required_ebn0`]).
    Modulation {
        /// The modulation.
        modulation: Modulation,
        /// Target bit error rate.
        ber: f32,
        /// Bit rate, bit/s.
        bit_rate_bps: f32,
    },
}

/// Allowance for fading on top of the requirement.
#[derive(Debug, Clone, Copy, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub enum FadeAllowance {
    /// No allowance.
    None,
    /// A fixed margin in dB.
    Fixed(Db),
    /// The margin a fading model needs for an availability (a fraction in (0, 1)).
    Model {
        /// Fading model.
        model: FadingModel,
        /// Availability, as a fraction.
        availability: f32,
    },
}

/// How the receiver's noise is described.
#[derive(Debug, Clone, Copy, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct NoiseSpec {
    /// Noise bandwidth.
    pub bandwidth: Hertz,
    /// Receiver noise figure.
    pub noise_figure: Db,
    /// Antenna noise temperature; `None` means the antenna sees T0 = 290 K, so
    /// that the noise is kT0·B·F (common practice for terrestrial links).
    pub antenna_temperature: Option<Kelvin>,
}

/// Why a budget could not be built or evaluated.
#[derive(Debug, Clone, Copy, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
#[non_exhaustive]
pub enum BudgetError {
    /// More than `N` line items.
    CapacityFull,
    /// A line-item name longer than [`ITEM_NAME_LEN`] bytes.
    NameTooLong,
    /// A calculation refused its input.
    Input(Error),
    /// A noise description on a transmitter- or path-side item.
    NoiseOffReceiveSide,
    /// An item without noise of its own (an antenna gain) after a passive
    /// loss or an amplifier on the receive side: antenna gains come first.
    AntennaAfterChain,
}

impl From<Error> for BudgetError {
    fn from(e: Error) -> Self {
        BudgetError::Input(e)
    }
}

impl fmt::Display for BudgetError {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match self {
            BudgetError::CapacityFull => f.write_str("too many line items for this budget"),
            BudgetError::NameTooLong => {
                write!(f, "line item name longer than {ITEM_NAME_LEN} bytes")
            }
            BudgetError::Input(e) => e.fmt(f),
            BudgetError::NoiseOffReceiveSide => {
                f.write_str("a noise figure or temperature belongs to a receive-side item")
            }
            BudgetError::AntennaAfterChain => f.write_str(
                "a receive-side gain without a noise figure (an antenna) must come before the \
                 passive losses and amplifiers of the receive chain; give an amplifier its noise_figure",
            ),
        }
    }
}

impl core::error::Error for BudgetError {}

/// Which stage of the chain a [`Level`] follows.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub enum Stage {
    /// The transmitter output: the transmit power itself.
    TransmitterOutput,
    /// After one named line item on the given side.
    Item(Side),
    /// The effective isotropic radiated power (after every transmitter-side item).
    Eirp,
    /// After the modelled propagation loss of the path.
    PathLoss,
    /// The receiver input (after every item): the received power.
    ReceiverInput,
}

/// The power at one point of the chain, for level diagrams and reports.
#[derive(Debug, Clone, Copy, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct Level<'a> {
    /// The stage this level follows.
    pub stage: Stage,
    /// The line item's name, or a fixed name for the other stages
    /// ("transmitter output", "EIRP", "path loss", "receiver input").
    pub name: &'a str,
    /// Power after this stage.
    pub level: Dbm,
    /// The stage's own gain (a line item's gain, the path loss as a negative
    /// gain); `None` for the transmitter output, EIRP and receiver input.
    pub gain: Option<Db>,
}

/// A link of at most `N` line items.
#[derive(Debug, Clone, PartialEq)]
pub struct Link<const N: usize> {
    /// Power at the transmitter output.
    pub tx_power: Dbm,
    /// Modelled propagation loss of the path (positive dB).
    pub path_loss: Db,
    /// Named gains and losses.
    pub items: Vec<LineItem, N>,
    /// Receiver noise.
    pub noise: NoiseSpec,
    /// What the receiver needs.
    pub requirement: Requirement,
    /// Fade allowance on top of the requirement.
    pub fade: FadeAllowance,
}

/// The receive chain's noise, from [`Link::receive_chain`].
#[derive(Debug, Clone, Copy, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct ReceiveChain {
    /// System noise temperature at the antenna terminals.
    pub at_antenna: Kelvin,
    /// System noise temperature at the receiver input (end of the chain).
    pub at_receiver_input: Kelvin,
    /// Gain of the chain items (passive losses and amplifiers), dB.
    pub chain_gain: Db,
    /// Sum of the antenna gains before the chain, dB.
    pub antenna_gain: Db,
}

/// Everything a budget evaluation gives.
#[derive(Debug, Clone, Copy, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct BudgetResult {
    /// Effective isotropic radiated power.
    pub eirp: Dbm,
    /// Power at the receiver input.
    pub rx_power: Dbm,
    /// Noise power in the noise bandwidth at the receiver input.
    pub noise_power: Dbm,
    /// System noise temperature referred to the receiver input (the end of
    /// the receive chain, where `rx_power` is given): the Friis cascade of
    /// the antenna, the receive-chain items and the receiver.
    pub system_temperature: Kelvin,
    /// The same system noise temperature referred to the antenna terminals
    /// (after the antenna gains, before the first chain item).
    pub system_temperature_antenna: Kelvin,
    /// Sum of the receive-side antenna gains (items before the chain).
    pub rx_antenna_gain: Db,
    /// Figure of merit G/T at the antenna terminals, dB/K.
    pub g_over_t: Db,
    /// Carrier-to-noise ratio.
    pub cn: Db,
    /// Carrier-to-noise density, dB-Hz.
    pub cn0: Db,
    /// Eb/N0 when the requirement names a bit rate.
    pub ebn0: Option<Db>,
    /// The C/N the requirement asks for.
    pub required_cn: Db,
    /// The fade allowance used.
    pub fade_margin: Db,
    /// The receiver sensitivity: noise power + required C/N.
    pub sensitivity: Dbm,
    /// What is left: C/N − required C/N − fade allowance.
    pub margin: Db,
}

fn ratio_db(name: &'static str, x: f32) -> Result<Db, Error> {
    let x = positive(name, x)?;
    Ok(Db(10.0 * libm::log10f(x)))
}

impl<const N: usize> Link<N> {
    /// A link with no line items yet.
    pub fn new(
        tx_power: Dbm,
        path_loss: Db,
        noise: NoiseSpec,
        requirement: Requirement,
        fade: FadeAllowance,
    ) -> Self {
        Link {
            tx_power,
            path_loss,
            items: Vec::new(),
            noise,
            requirement,
            fade,
        }
    }

    /// Add a named gain (or, negative, a loss) that adds no noise of its
    /// own (an antenna gain; any transmitter- or path-side item).
    pub fn push(&mut self, name: &str, side: Side, gain: Db) -> Result<(), BudgetError> {
        self.push_item(name, side, gain, ItemNoise::None)
    }

    /// Add a named item with its noise (see [`ItemNoise`]). A receive-side
    /// gain without noise (an antenna) after a passive loss or an amplifier
    /// is refused, as is noise on another side.
    pub fn push_item(
        &mut self,
        name: &str,
        side: Side,
        gain: Db,
        noise: ItemNoise,
    ) -> Result<(), BudgetError> {
        finite("line item gain", gain.0)?;
        match (side, noise) {
            (Side::Receiver, ItemNoise::None) => {
                if self
                    .items
                    .iter()
                    .any(|i| i.side == Side::Receiver && i.noise != ItemNoise::None)
                {
                    return Err(BudgetError::AntennaAfterChain);
                }
            }
            (Side::Receiver, ItemNoise::Passive { temperature }) => {
                non_negative("item temperature", temperature.0)?;
            }
            (Side::Receiver, ItemNoise::Amplifier { noise_figure }) => {
                non_negative("item noise figure", noise_figure.0)?;
            }
            (_, ItemNoise::None) => {}
            _ => return Err(BudgetError::NoiseOffReceiveSide),
        }
        let mut n = String::new();
        n.push_str(name).map_err(|()| BudgetError::NameTooLong)?;
        self.items
            .push(LineItem {
                name: n,
                side,
                gain,
                noise,
            })
            .map_err(|_| BudgetError::CapacityFull)
    }

    /// EIRP at transmit power `tx`: `tx` plus the transmitter-side items.
    pub fn eirp_at(&self, tx: Dbm) -> Dbm {
        tx + self.side_total(Side::Transmitter)
    }

    /// The receive chain's noise: system noise temperature at the antenna
    /// terminals by Friis' cascade in temperatures,
    /// `Tsys = Ta + Te1 + Te2/G1 + … + Trx/(G1·…·Gn)`, over the receive-side
    /// passive losses (`Te = T·(L − 1)`) and amplifiers (`Te = T0·(F − 1)`)
    /// in their listed order and the receiver last; with the chain's gain
    /// `G1·…·Gn` in dB and the antenna gains before it.
    ///
    /// For a feeder of loss L at temperature Tp before the receiver, referred
    /// to the receiver input this is `Ta/L + Tp·(1 − 1/L) + Trx` (common
    /// practice; e.g. Pozar, Microwave Engineering, §10.1).
    pub fn receive_chain(&self) -> Result<ReceiveChain, Error> {
        let ta = non_negative(
            "antenna temperature",
            self.noise.antenna_temperature.unwrap_or(Kelvin(T0_K)).0,
        )?;
        let nf = Db(non_negative("noise figure", self.noise.noise_figure.0)?);
        let mut te = 0.0_f32;
        let mut chain_gain_db = 0.0_f32;
        let mut antenna_gain_db = 0.0_f32;
        for i in self.items.iter().filter(|i| i.side == Side::Receiver) {
            let g = finite("line item gain", i.gain.0)?;
            let item_te = match i.noise {
                ItemNoise::None => {
                    antenna_gain_db += g;
                    continue;
                }
                ItemNoise::Passive { temperature } => {
                    let t = non_negative("item temperature", temperature.0)?;
                    // A loss L = 1/G: Te = T·(L − 1).
                    t * (libm::exp10f(-g / 10.0) - 1.0)
                }
                ItemNoise::Amplifier { noise_figure } => {
                    noise_temperature_from_figure(noise_figure)?.0
                }
            };
            te += item_te * libm::exp10f(-chain_gain_db / 10.0);
            chain_gain_db += g;
        }
        te += noise_temperature_from_figure(nf)?.0 * libm::exp10f(-chain_gain_db / 10.0);
        let at_antenna = ta + te;
        let at_input = at_antenna * libm::exp10f(chain_gain_db / 10.0);
        if !(at_antenna.is_finite() && at_input.is_finite() && at_input > 0.0) {
            return Err(Error::NoSolution("system noise temperature"));
        }
        Ok(ReceiveChain {
            at_antenna: Kelvin(at_antenna),
            at_receiver_input: Kelvin(at_input),
            chain_gain: Db(chain_gain_db),
            antenna_gain: Db(antenna_gain_db),
        })
    }

    /// Sum of the gains on one side.
    pub fn side_total(&self, side: Side) -> Db {
        self.items
            .iter()
            .filter(|i| i.side == side)
            .fold(Db(0.0), |a, i| a + i.gain)
    }

    /// The C/N the requirement asks for, and the bit rate it names if any.
    pub fn required_cn(&self) -> Result<(Db, Option<f32>), Error> {
        let b = positive("bandwidth", self.noise.bandwidth.0)?;
        match self.requirement {
            Requirement::CarrierToNoise(cn) => Ok((Db(finite("required C/N", cn.0)?), None)),
            Requirement::EbN0 { ebn0, bit_rate_bps } => {
                finite("required Eb/N0", ebn0.0)?;
                let rb_over_b = ratio_db("bit rate", positive("bit rate", bit_rate_bps)? / b)?;
                Ok((ebn0 + rb_over_b, Some(bit_rate_bps)))
            }
            Requirement::Modulation {
                modulation,
                ber,
                bit_rate_bps,
            } => {
                let ebn0 = required_ebn0(modulation, probability("ber", ber)?)?;
                let rb_over_b = ratio_db("bit rate", positive("bit rate", bit_rate_bps)? / b)?;
                Ok((ebn0 + rb_over_b, Some(bit_rate_bps)))
            }
        }
    }

    /// The fade allowance in dB.
    pub fn fade_margin(&self) -> Result<Db, Error> {
        match self.fade {
            FadeAllowance::None => Ok(Db(0.0)),
            FadeAllowance::Fixed(m) => Ok(Db(non_negative("fade margin", m.0)?)),
            FadeAllowance::Model {
                model,
                availability,
            } => margin_for_availability(model, probability("availability", availability)?),
        }
    }

    /// Walk the chain and compute every figure of the budget.
    pub fn evaluate(&self) -> Result<BudgetResult, Error> {
        finite("tx power", self.tx_power.0)?;
        finite("path loss", self.path_loss.0)?;
        let bw = self.noise.bandwidth;
        positive("bandwidth", bw.0)?;
        non_negative("noise figure", self.noise.noise_figure.0)?;

        let eirp = self.tx_power + self.side_total(Side::Transmitter);
        let rx_power =
            eirp - self.path_loss + self.side_total(Side::Path) + self.side_total(Side::Receiver);

        // System temperature referred to the receiver input, where the
        // received power is given: the receive chain's Friis cascade.
        let chain = self.receive_chain()?;
        let system_temperature = chain.at_receiver_input;
        let noise_power = thermal_noise(bw, system_temperature)?;
        let g_over_t = Db(chain.antenna_gain.0 - 10.0 * libm::log10f(chain.at_antenna.0));
        let cn = rx_power - noise_power;
        let cn0 = cn + ratio_db("bandwidth", bw.0)?;
        let (required_cn, bit_rate) = self.required_cn()?;
        let ebn0 = match bit_rate {
            Some(rb) => Some(cn0 - ratio_db("bit rate", rb)?),
            None => None,
        };
        let fade_margin = self.fade_margin()?;
        let margin = cn - required_cn - fade_margin;
        let result = BudgetResult {
            eirp,
            rx_power,
            noise_power,
            system_temperature,
            system_temperature_antenna: chain.at_antenna,
            rx_antenna_gain: chain.antenna_gain,
            g_over_t,
            cn,
            cn0,
            ebn0,
            required_cn,
            fade_margin,
            sensitivity: noise_power + required_cn,
            margin,
        };
        if !(result.rx_power.is_finite() && result.cn.is_finite() && result.margin.is_finite()) {
            return Err(Error::NoSolution("budget"));
        }
        Ok(result)
    }

    /// The power along the chain, in order: transmitter output, each
    /// transmitter-side item, EIRP, path loss, each path item, each
    /// receiver-side item, receiver input. Items keep their order within a
    /// side. Each level is the previous one plus the stage's gain in dB
    /// (common practice); EIRP and the receiver input are computed exactly
    /// as [`Link::evaluate`] computes them, so they agree to the bit.
    pub fn levels(&self) -> Result<impl Iterator<Item = Level<'_>> + '_, Error> {
        finite("tx power", self.tx_power.0)?;
        finite("path loss", self.path_loss.0)?;
        let eirp = self.tx_power + self.side_total(Side::Transmitter);
        let after_loss = eirp - self.path_loss;
        let after_path = after_loss + self.side_total(Side::Path);
        let rx_power =
            eirp - self.path_loss + self.side_total(Side::Path) + self.side_total(Side::Receiver);
        let fixed = |stage, name, level| Level {
            stage,
            name,
            level,
            gain: None,
        };
        let running = move |side: Side, start: Dbm| {
            self.items
                .iter()
                .filter(move |i| i.side == side)
                .scan(start, move |acc, i| {
                    *acc += i.gain;
                    Some(Level {
                        stage: Stage::Item(side),
                        name: i.name.as_str(),
                        level: *acc,
                        gain: Some(i.gain),
                    })
                })
        };
        let chain = core::iter::once(fixed(
            Stage::TransmitterOutput,
            "transmitter output",
            self.tx_power,
        ))
        .chain(running(Side::Transmitter, self.tx_power))
        .chain(core::iter::once(fixed(Stage::Eirp, "EIRP", eirp)))
        .chain(core::iter::once(Level {
            stage: Stage::PathLoss,
            name: "path loss",
            level: after_loss,
            gain: Some(Db(-self.path_loss.0)),
        }))
        .chain(running(Side::Path, after_loss))
        .chain(running(Side::Receiver, after_path))
        .chain(core::iter::once(fixed(
            Stage::ReceiverInput,
            "receiver input",
            rx_power,
        )));
        if !rx_power.is_finite() {
            return Err(Error::NoSolution("budget"));
        }
        Ok(chain)
    }

    /// Transmit power that leaves `target_margin` (dB, may be 0).
    pub fn tx_power_for_margin(&self, target_margin: Db) -> Result<Dbm, Error> {
        let r = self.evaluate()?;
        finite("target margin", target_margin.0)?;
        Ok(self.tx_power + (target_margin - r.margin))
    }

    /// Transmit power that delivers `rx_target` at the receiver input.
    pub fn tx_power_for_rx_power(&self, rx_target: Dbm) -> Result<Dbm, Error> {
        let r = self.evaluate()?;
        finite("target received power", rx_target.0)?;
        Ok(self.tx_power + (rx_target - r.rx_power))
    }

    /// Largest path loss that still leaves `target_margin`.
    pub fn max_path_loss(&self, target_margin: Db) -> Result<Db, Error> {
        let r = self.evaluate()?;
        finite("target margin", target_margin.0)?;
        Ok(self.path_loss + (r.margin - target_margin))
    }

    /// Largest distance at which `model` leaves `target_margin` at `frequency`.
    pub fn max_range(
        &self,
        model: &PathLossModel,
        frequency: Hertz,
        target_margin: Db,
    ) -> Result<Metres, Error> {
        let max_loss = self.max_path_loss(target_margin)?;
        model.range_for_loss(frequency, max_loss)
    }
}

/// What is held fixed when a link moves to another frequency.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub enum AntennaScaling {
    /// Both antennas keep their gain (their apertures shrink as λ²).
    FixedGains,
    /// One antenna keeps its gain, the other its effective aperture.
    OneFixedAperture,
    /// Both antennas keep their effective aperture (gains grow as f²).
    FixedApertures,
}

/// Change of free-space received power, in dB, when a link moves from `f1` to
/// `f2` with the given antennas held fixed.
///
/// From Friis, Pr/Pt = Gt·Gr·(λ/4πd)²; with G = 4πA/λ² each fixed aperture
/// contributes a factor f², so the received power scales as f^(2k − 2) with k
/// the number of fixed-aperture ends: −20 log10(f2/f1) dB for fixed gains, 0
/// for one fixed aperture, +20 log10(f2/f1) for two.
pub fn free_space_frequency_scaling(
    f1: Hertz,
    f2: Hertz,
    antennas: AntennaScaling,
) -> Result<Db, Error> {
    let r = ratio_db(
        "frequency",
        positive("frequency", f2.0)? / positive("frequency", f1.0)?,
    )?;
    let k = match antennas {
        AntennaScaling::FixedGains => 0.0,
        AntennaScaling::OneFixedAperture => 1.0,
        AntennaScaling::FixedApertures => 2.0,
    };
    Ok(Db(2.0 * r.0 * (k - 1.0)))
}

/// Change of one antenna's gain, in dB, when a link moves from `f1` to `f2`
/// with that antenna's effective aperture held fixed: `G = 4πA/λ²`, so
/// `+20·log10(f2/f1)` (common practice).
pub fn fixed_aperture_gain_change(f1: Hertz, f2: Hertz) -> Result<Db, Error> {
    let r = ratio_db(
        "frequency",
        positive("frequency", f2.0)? / positive("frequency", f1.0)?,
    )?;
    Ok(Db(2.0 * r.0))
}

/// Factor by which the free-space range grows when a link moves from `f1` to
/// `f2` at the same margin (range ∝ received-power ratio^(1/2) in free space).
pub fn free_space_range_scaling(
    f1: Hertz,
    f2: Hertz,
    antennas: AntennaScaling,
) -> Result<f32, Error> {
    let db = free_space_frequency_scaling(f1, f2, antennas)?;
    Ok(libm::exp10f(db.0 / 20.0))
}

#[cfg(test)]
mod tests {
    use super::*;

    fn link() -> Link<8> {
        let mut l = Link::new(
            Dbm(14.0),
            Db(120.0),
            NoiseSpec {
                bandwidth: Hertz(125e3),
                noise_figure: Db(6.0),
                antenna_temperature: None,
            },
            Requirement::CarrierToNoise(Db(-7.5)),
            FadeAllowance::Fixed(Db(10.0)),
        );
        let _ = l.push("antenna", Side::Transmitter, Db(2.15));
        let _ = l.push("cable", Side::Transmitter, Db(-0.5));
        let _ = l.push("foliage", Side::Path, Db(-6.0));
        let _ = l.push("antenna", Side::Receiver, Db(5.0));
        l
    }

    #[test]
    fn chain_sums_in_db() {
        let r = link().evaluate();
        assert!(r.is_ok());
        if let Ok(r) = r {
            assert!((r.eirp.0 - 15.65).abs() < 1e-4);
            assert!((r.rx_power.0 - (15.65 - 120.0 - 6.0 + 5.0)).abs() < 1e-4);
            // kT0B·F: -173.98 + 10log10(125e3) + 6 = -117.01 dBm (common practice).
            assert!((r.noise_power.0 + 117.01).abs() < 0.02);
        }
    }

    #[test]
    fn levels_walk_the_chain_in_order() {
        let l = link();
        let r = l.evaluate();
        assert!(r.is_ok());
        let Ok(r) = r else { return };
        let lv: Vec<Level<'_>, 16> = match l.levels() {
            Ok(it) => it.collect(),
            Err(_) => Vec::new(),
        };
        let names: Vec<&str, 16> = lv.iter().map(|x| x.name).collect();
        assert_eq!(
            names.as_slice(),
            [
                "transmitter output",
                "antenna",
                "cable",
                "EIRP",
                "path loss",
                "foliage",
                "antenna",
                "receiver input"
            ]
        );
        let at = |k: usize| lv.get(k).map(|x| x.level.0).unwrap_or(f32::NAN);
        assert_eq!(at(0), 14.0);
        assert!((at(1) - 16.15).abs() < 1e-4);
        assert!((at(2) - 15.65).abs() < 1e-4);
        // The anchors agree with evaluate() to the bit.
        assert_eq!(at(3), r.eirp.0);
        assert_eq!(at(7), r.rx_power.0);
        assert!((at(4) - (15.65 - 120.0)).abs() < 1e-4);
        assert!((at(5) - (15.65 - 126.0)).abs() < 1e-4);
        // The last item's running sum lands on the received power.
        assert!((at(6) - at(7)).abs() < 1e-4);
        assert_eq!(
            lv.get(6).map(|x| x.stage),
            Some(Stage::Item(Side::Receiver))
        );
        let mut bad = l.clone();
        bad.path_loss = Db(f32::INFINITY);
        assert!(bad.levels().is_err());
    }

    #[test]
    fn inverses_close_the_loop() {
        let l = link();
        let tx = l.tx_power_for_margin(Db(3.0)).unwrap_or(Dbm(f32::NAN));
        let mut l2 = l.clone();
        l2.tx_power = tx;
        let m = l2.evaluate().map(|r| r.margin.0).unwrap_or(f32::NAN);
        assert!((m - 3.0).abs() < 1e-3);
        let pl = l.max_path_loss(Db(0.0)).unwrap_or(Db(f32::NAN));
        let mut l3 = l.clone();
        l3.path_loss = pl;
        let m = l3.evaluate().map(|r| r.margin.0).unwrap_or(f32::NAN);
        assert!(m.abs() < 1e-3);
    }

    #[test]
    fn capacity_and_names_are_bounded() {
        let mut l: Link<1> = Link::new(
            Dbm(0.0),
            Db(100.0),
            NoiseSpec {
                bandwidth: Hertz(1e3),
                noise_figure: Db(3.0),
                antenna_temperature: None,
            },
            Requirement::CarrierToNoise(Db(10.0)),
            FadeAllowance::None,
        );
        assert_eq!(l.push("a", Side::Path, Db(-1.0)), Ok(()));
        assert_eq!(
            l.push("b", Side::Path, Db(-1.0)),
            Err(BudgetError::CapacityFull)
        );
        let long = "x".repeat(ITEM_NAME_LEN + 1);
        let mut l2: Link<4> = Link::new(Dbm(0.0), Db(100.0), l.noise, l.requirement, l.fade);
        assert_eq!(
            l2.push(&long, Side::Path, Db(0.0)),
            Err(BudgetError::NameTooLong)
        );
        assert!(l2.push("nan", Side::Path, Db(f32::NAN)).is_err());
    }

    #[test]
    fn frequency_scaling() {
        let s =
            free_space_frequency_scaling(Hertz(868e6), Hertz(2.4e9), AntennaScaling::FixedGains)
                .unwrap_or(Db(f32::NAN));
        assert!((s.0 + 20.0 * libm::log10f(2.4e9 / 868e6)).abs() < 1e-4);
        let s =
            free_space_frequency_scaling(Hertz(1e9), Hertz(2e9), AntennaScaling::OneFixedAperture)
                .unwrap_or(Db(f32::NAN));
        assert!(s.0.abs() < 1e-5);
        // Doubling the frequency with a fixed aperture: +6.02 dB of gain.
        let g = fixed_aperture_gain_change(Hertz(1e9), Hertz(2e9)).unwrap_or(Db(f32::NAN));
        assert!((g.0 - 6.0206).abs() < 1e-3);
        let r = free_space_range_scaling(Hertz(1e9), Hertz(2e9), AntennaScaling::FixedGains)
            .unwrap_or(f32::NAN);
        assert!((r - 0.5).abs() < 1e-5);
    }
}
