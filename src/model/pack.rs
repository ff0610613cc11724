//! Cells and the pack built from them.

use super::curve::Table;

/// Seconds in the month of the self-discharge rate: 30.44 days.
pub const MONTH_S: f64 = 30.44 * 86_400.0;

/// Cell chemistry.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Chemistry {
    /// Lithium-ion.
    LiIon,
    /// Lithium iron phosphate.
    LiFePo4,
    /// Nickel-metal hydride.
    NiMh,
    /// Alkaline zinc-manganese dioxide.
    Alkaline,
    /// Lithium-manganese dioxide primary.
    LiMnO2,
    /// Lithium-thionyl chloride primary.
    LiSoCl2,
    /// Lead-acid.
    LeadAcid,
    /// Anything else.
    Other,
}

impl Chemistry {
    /// The rate window a cell of this chemistry gets when it does not give one, s: five minutes
    /// ([`DEFAULT_RATE_WINDOW_S`]) for the primary chemistries, whose rated capacity is
    /// measured at light drains and whose products draw in short bursts (coin cells, bobbin
    /// cells, alkaline); the current of the instant (0) for rechargeable and other cells,
    /// whose Peukert exponent is usually fitted to steady discharges at C-rates, as the
    /// design contract's worked cases take it.
    pub fn rate_window_s(self) -> f64 {
        match self {
            Chemistry::Alkaline | Chemistry::LiMnO2 | Chemistry::LiSoCl2 => DEFAULT_RATE_WINDOW_S,
            Chemistry::LiIon
            | Chemistry::LiFePo4
            | Chemistry::NiMh
            | Chemistry::LeadAcid
            | Chemistry::Other => 0.0,
        }
    }

    /// The name used in design files.
    pub fn name(self) -> &'static str {
        match self {
            Chemistry::LiIon => "li-ion",
            Chemistry::LiFePo4 => "lifepo4",
            Chemistry::NiMh => "nimh",
            Chemistry::Alkaline => "alkaline",
            Chemistry::LiMnO2 => "li-mno2",
            Chemistry::LiSoCl2 => "li-socl2",
            Chemistry::LeadAcid => "lead-acid",
            Chemistry::Other => "other",
        }
    }

    /// Whether cells of this chemistry contain lithium (the safety caution applies most).
    pub fn is_lithium(self) -> bool {
        matches!(
            self,
            Chemistry::LiIon | Chemistry::LiFePo4 | Chemistry::LiMnO2 | Chemistry::LiSoCl2
        )
    }
}

/// Time constant of the filter through which the rate law (Peukert) sees the pack current, for
/// a primary cell that does not give its own `rate_window`, s: five minutes (common practice,
/// no source; the loss of capacity at high current comes from depletion near the electrodes
/// that recovers within minutes of rest, so a burst of milliseconds costs charge at the
/// sustained current, not at its own). See [`Chemistry::rate_window_s`].
pub const DEFAULT_RATE_WINDOW_S: f64 = 300.0;

/// One cell, in SI units. Fields are checked when the design is read.
#[derive(Debug, Clone)]
pub struct Cell {
    /// Name (a key of `cells`, a preset, or `inline`).
    pub name: String,
    /// Chemistry.
    pub chemistry: Chemistry,
    /// Rated capacity, C.
    pub capacity_c: f64,
    /// Current of the capacity rating, A.
    pub rated_current_a: f64,
    /// OCV against SoC (0..1), V.
    pub ocv: Table,
    /// Ohmic resistance against SoC, Ω.
    pub resistance: Table,
    /// Polarization resistance, Ω, and time constant, s (0 and 0 when absent).
    pub polarization: Option<(f64, f64)>,
    /// Peukert exponent, >= 1.
    pub peukert: f64,
    /// Time constant of the first-order filter through which the rate law sees the pack
    /// current, s (0: the current of the instant).
    pub rate_window_s: f64,
    /// Cutoff voltage, V.
    pub cutoff_v: f64,
    /// Continuous discharge limit, A.
    pub max_current_a: Option<f64>,
    /// Self-discharge, fraction of rated capacity per second.
    pub self_discharge_per_s: f64,
    /// Capacity factor against temperature (°C).
    pub temp_capacity: Table,
    /// Resistance factor against temperature (°C).
    pub temp_resistance: Table,
    /// Mass of one cell, kg (unknown when the cell does not give it).
    pub mass_kg: Option<f64>,
    /// Outer size of one cell (unknown when the cell does not give it).
    pub size: Option<CellSize>,
}

/// The outer size of a cell.
///
/// # Examples
///
/// ```
/// use joulepath::model::CellSize;
/// let aa = CellSize::Cylinder { diameter_m: 0.0145, height_m: 0.0505 };
/// // V = pi d^2 h / 4 (volume of a right circular cylinder).
/// assert!((aa.volume_m3() - 8.339e-6).abs() < 1e-9);
/// assert_eq!(aa.describe(), "14.5 × 50.5 mm (diameter × height)");
/// ```
#[derive(Debug, Clone, Copy, PartialEq)]
pub enum CellSize {
    /// A cylinder (round cells and coin cells): diameter and height, m.
    Cylinder {
        /// Diameter, m.
        diameter_m: f64,
        /// Height, m.
        height_m: f64,
    },
    /// A box (pouch and prismatic cells): length, width and height, m.
    Box {
        /// Length, m.
        length_m: f64,
        /// Width, m.
        width_m: f64,
        /// Height (thickness), m.
        height_m: f64,
    },
}

impl CellSize {
    /// The cell's own volume, m³: pi d² h / 4 for a cylinder, L W H for a box.
    pub fn volume_m3(self) -> f64 {
        match self {
            CellSize::Cylinder {
                diameter_m,
                height_m,
            } => std::f64::consts::PI * diameter_m * diameter_m * height_m / 4.0,
            CellSize::Box {
                length_m,
                width_m,
                height_m,
            } => length_m * width_m * height_m,
        }
    }

    /// The size in millimetres, saying which is which: `14.5 × 50.5 mm (diameter × height)`.
    pub fn describe(self) -> String {
        // Tenths of a millimetre, as cell drawings give them.
        let mm = |m: f64| {
            let t = format!("{:.1}", m * 1e3);
            t.strip_suffix(".0").map_or(t.clone(), str::to_string)
        };
        match self {
            CellSize::Cylinder {
                diameter_m,
                height_m,
            } => format!(
                "{} × {} mm (diameter × height)",
                mm(diameter_m),
                mm(height_m)
            ),
            CellSize::Box {
                length_m,
                width_m,
                height_m,
            } => format!(
                "{} × {} × {} mm (length × width × height)",
                mm(length_m),
                mm(width_m),
                mm(height_m)
            ),
        }
    }
}

/// The pack: cells in series and parallel, at an ambient temperature, with aging.
///
/// # Formula
///
/// OCV_pack(s) = series x OCV_cell(s); R_pack = series x R_cell(s) / parallel x f_T x f_age;
/// Q = parallel x capacity x capacity_factor(T) x aging_capacity (DESIGN section 5; the series and
/// parallel algebra is textbook circuit theory).
#[derive(Debug, Clone)]
pub struct Pack {
    /// The cell.
    pub cell: Cell,
    /// Cells in series.
    pub series: u32,
    /// Strings in parallel.
    pub parallel: u32,
    /// SoC at the start, 0..1.
    pub start_soc: f64,
    /// Remaining capacity factor from aging.
    pub aging_capacity: f64,
    /// Resistance factor from aging.
    pub aging_resistance: f64,
}

impl Pack {
    fn scale_r(&self, ambient_c: f64) -> f64 {
        f64::from(self.series) / f64::from(self.parallel)
            * self.cell.temp_resistance.at(ambient_c)
            * self.aging_resistance
    }

    /// Open-circuit voltage of the pack at SoC `s` (0..1).
    pub fn ocv(&self, s: f64) -> f64 {
        f64::from(self.series) * self.cell.ocv.at(s)
    }

    /// Ohmic resistance of the pack at SoC `s` and ambient temperature.
    pub fn r0(&self, s: f64, ambient_c: f64) -> f64 {
        self.cell.resistance.at(s) * self.scale_r(ambient_c)
    }

    /// Polarization resistance of the pack and its time constant, if the cell has the branch.
    pub fn polarization(&self, ambient_c: f64) -> Option<(f64, f64)> {
        self.cell
            .polarization
            .map(|(r, tau)| (r * self.scale_r(ambient_c), tau))
    }

    /// Usable charge of the full pack at the ambient temperature, C.
    pub fn capacity_c(&self, ambient_c: f64) -> f64 {
        f64::from(self.parallel)
            * self.cell.capacity_c
            * self.cell.temp_capacity.at(ambient_c)
            * self.aging_capacity
    }

    /// Pack cutoff voltage.
    pub fn cutoff_v(&self) -> f64 {
        f64::from(self.series) * self.cell.cutoff_v
    }

    /// Pack continuous current limit.
    pub fn max_current_a(&self) -> Option<f64> {
        self.cell
            .max_current_a
            .map(|i| i * f64::from(self.parallel))
    }

    /// Current of the pack's capacity rating.
    pub fn rated_current_a(&self) -> f64 {
        self.cell.rated_current_a * f64::from(self.parallel)
    }

    /// Self-discharge current: rate x parallel x rated capacity (no temperature or aging factor).
    pub fn self_discharge_a(&self) -> f64 {
        self.cell.self_discharge_per_s * f64::from(self.parallel) * self.cell.capacity_c
    }

    /// Peukert-effective current: I x max(1, I / I_rated)^(k - 1), no bonus below the rating.
    pub fn peukert_current(&self, i: f64) -> f64 {
        self.peukert_current_seen(i, i)
    }

    /// Peukert-effective current of `i` when the rate law sees the sustained current `seen`
    /// (the pack current filtered over the cell's rate window): I x max(1, I_seen /
    /// I_rated)^(k - 1). A millisecond pulse sags the voltage but costs charge at the rate of
    /// the sustained current.
    pub fn peukert_current_seen(&self, i: f64, seen: f64) -> f64 {
        let ratio = seen / self.rated_current_a();
        if ratio > 1.0 && self.cell.peukert > 1.0 {
            i * ratio.powf(self.cell.peukert - 1.0)
        } else {
            i
        }
    }
}
