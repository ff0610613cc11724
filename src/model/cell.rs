//! A cell: its chemistry, curves, limits, self-discharge law and size.

use super::table::Table;

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

    /// The default temperature dependence of the chemistry's self-discharge: the rise in
    /// temperature, K, that doubles the rate (`None` for `other`, which has no default).
    ///
    /// Every chemistry takes the same rule: reaction rates near room temperature roughly
    /// double for every 10 °C (J. H. van 't Hoff, Études de dynamique chimique, 1884, his rule
    /// of two- to threefold per 10 °C; as applied to self-discharge, common practice, no source;
    /// the team's references, C23). Doubling every 10 °C near 25 °C is the Arrhenius law with
    /// an activation energy of about 53 kJ/mol. A cell with a measured dependence gives its
    /// own `doubles_every` or `activation_energy`.
    pub fn self_discharge_doubling_k(self) -> Option<f64> {
        // Lithium-ion and LiFePO4 (from memory, the calendar loss of lithium-ion cells speeds
        // up about as much per 10 °C); NiMH and lead-acid (from memory, typical of the
        // chemistries); the primaries, alkaline, Li-MnO2 and Li-SOCl2 (from memory, their shelf
        // losses rise steeply in hot storage): all the rule above.
        match self {
            Chemistry::LiIon
            | Chemistry::LiFePo4
            | Chemistry::NiMh
            | Chemistry::LeadAcid
            | Chemistry::Alkaline
            | Chemistry::LiMnO2
            | Chemistry::LiSoCl2 => Some(10.0),
            Chemistry::Other => None,
        }
    }

    /// The hours of discharge the capacity of a cell of this chemistry is rated over when the
    /// cell gives no `rated_current`: the default rated current is capacity / these hours.
    ///
    /// Rechargeable cells are rated at 0.2 It, 5 h (IEC 61960-3 and IEC 61951-2, REFERENCES C17
    /// and C18, the rate from memory). Primary cells are rated at a light drain, far below
    /// 0.2 C: at C/5 a Peukert exponent would act only above a fifth of the capacity per hour,
    /// where these cells are seldom used, and an alkaline AA at 100 mA would be taken at its
    /// full capacity.
    pub fn default_rating_hours(self) -> f64 {
        match self {
            // Alkaline: about 100 h (a 25 mA drain for an AA; from memory, the light-load
            // tests of IEC 60086-2 run at tens of milliamps; the preset `alkaline-aa` uses it).
            Chemistry::Alkaline => 100.0,
            // Lithium-manganese dioxide coin cells: about 1000 h (a CR2032 is rated into about
            // 15 kΩ, 0.2 mA for 225 mAh; from memory, typical of the size; preset
            // `li-mno2-cr2032`).
            Chemistry::LiMnO2 => 1000.0,
            // Lithium-thionyl chloride bobbin cells: about 2000 h (about 1 mA for an AA of
            // 2.4 Ah; from memory, typical rating current of the size; preset `li-socl2-aa`).
            Chemistry::LiSoCl2 => 2000.0,
            // Rechargeables, and a cell of no chemistry: 0.2 It (DESIGN section 4's default).
            Chemistry::LiIon
            | Chemistry::LiFePo4
            | Chemistry::NiMh
            | Chemistry::LeadAcid
            | Chemistry::Other => 5.0,
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

/// The molar gas constant, J/(mol K) (CODATA 2018, exact).
pub const GAS_CONSTANT: f64 = 8.314_462_618;

/// How a cell's self-discharge rate changes with temperature.
#[derive(Debug, Clone, Copy, PartialEq)]
pub enum SelfDischargeLaw {
    /// The same rate at every temperature.
    Constant,
    /// The rate doubles for every rise of `every_k` kelvin: r(T) = r_ref 2^((T - T_ref) / N).
    Doubling {
        /// The rise that doubles the rate, K.
        every_k: f64,
    },
    /// The Arrhenius law: r(T) = r_ref exp(Ea / R (1 / T_ref - 1 / T)), T in kelvin.
    Arrhenius {
        /// Activation energy, J/mol.
        ea_j_per_mol: f64,
    },
}

impl SelfDischargeLaw {
    /// The rate at `temp_c` over the rate at `ref_c` (both °C): 1 at the reference.
    ///
    /// # Examples
    ///
    /// ```
    /// use joulepath::model::SelfDischargeLaw;
    /// let d = SelfDischargeLaw::Doubling { every_k: 10.0 };
    /// assert!((d.factor(25.0, 35.0) - 2.0).abs() < 1e-12);
    /// assert_eq!(SelfDischargeLaw::Constant.factor(25.0, 60.0), 1.0);
    /// ```
    pub fn factor(self, ref_c: f64, temp_c: f64) -> f64 {
        match self {
            SelfDischargeLaw::Constant => 1.0,
            SelfDischargeLaw::Doubling { every_k } => ((temp_c - ref_c) / every_k).exp2(),
            SelfDischargeLaw::Arrhenius { ea_j_per_mol } => {
                let (t, t_ref) = (temp_c + 273.15, ref_c + 273.15);
                if t <= 0.0 {
                    // At absolute zero no reaction runs (the limit of the law); the checker
                    // keeps the reference above it.
                    return 0.0;
                }
                (ea_j_per_mol / GAS_CONSTANT * (1.0 / t_ref - 1.0 / t)).exp()
            }
        }
    }
}

/// One cell, in SI units. Fields are checked when the design is read.
#[derive(Debug, Clone)]
pub struct Cell {
    /// Name (a key of `cells`, a preset, or `inline`).
    pub(crate) name: String,
    /// Whether the cell starts from a built-in preset (which gives every value with its origin)
    /// rather than being described in the design alone.
    pub(crate) from_preset: bool,
    /// Chemistry.
    pub(crate) chemistry: Chemistry,
    /// Rated capacity, C.
    pub(crate) capacity_c: f64,
    /// Current of the capacity rating, A.
    pub(crate) rated_current_a: f64,
    /// OCV against SoC (0..1), V.
    pub(crate) ocv: Table,
    /// Ohmic resistance against SoC, Ω.
    pub(crate) resistance: Table,
    /// Polarization resistance, Ω, and time constant, s (0 and 0 when absent).
    pub(crate) polarization: Option<(f64, f64)>,
    /// Peukert exponent, >= 1.
    pub(crate) peukert: f64,
    /// Time constant of the first-order filter through which the rate law sees the pack
    /// current, s (0: the current of the instant).
    pub(crate) rate_window_s: f64,
    /// Cutoff voltage, V.
    pub(crate) cutoff_v: f64,
    /// Continuous discharge limit, A.
    pub(crate) max_current_a: Option<f64>,
    /// Pulse discharge limit, A, and the longest pulse it allows, s.
    pub(crate) max_pulse: Option<(f64, f64)>,
    /// Self-discharge at `self_discharge_ref_c`, fraction of rated capacity per second.
    pub(crate) self_discharge_per_s: f64,
    /// The temperature of `self_discharge_per_s`, °C.
    pub(crate) self_discharge_ref_c: f64,
    /// How the self-discharge changes with temperature.
    pub(crate) self_discharge_law: SelfDischargeLaw,
    /// Capacity factor against temperature (°C).
    pub(crate) temp_capacity: Table,
    /// Resistance factor against temperature (°C).
    pub(crate) temp_resistance: Table,
    /// Mass of one cell, kg (unknown when the cell does not give it).
    pub(crate) mass_kg: Option<f64>,
    /// Outer size of one cell (unknown when the cell does not give it).
    pub(crate) size: Option<CellSize>,
}

impl Cell {
    /// Self-discharge at `temp_c` (°C), fraction of rated capacity per second: the rate at the
    /// reference temperature times the law's factor.
    pub fn self_discharge_at(&self, temp_c: f64) -> f64 {
        self.self_discharge_per_s
            * self
                .self_discharge_law
                .factor(self.self_discharge_ref_c, temp_c)
    }
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

/// Read access to the checked values (the fields stay private: only the checker builds a `Cell`).
impl Cell {
    /// Name (a key of `cells`, a preset, or `inline`).
    pub fn name(&self) -> &str {
        &self.name
    }

    /// Whether the cell starts from a built-in preset (which gives every value with its origin)
    /// rather than being described in the design alone.
    pub fn from_preset(&self) -> bool {
        self.from_preset
    }

    /// Chemistry.
    pub fn chemistry(&self) -> Chemistry {
        self.chemistry
    }

    /// Rated capacity, C.
    pub fn capacity_c(&self) -> f64 {
        self.capacity_c
    }

    /// Current of the capacity rating, A.
    pub fn rated_current_a(&self) -> f64 {
        self.rated_current_a
    }

    /// OCV against SoC (0..1), V.
    pub fn ocv(&self) -> &Table {
        &self.ocv
    }

    /// Ohmic resistance against SoC, Ω.
    pub fn resistance(&self) -> &Table {
        &self.resistance
    }

    /// Polarization resistance, Ω, and time constant, s (0 and 0 when absent).
    pub fn polarization(&self) -> Option<(f64, f64)> {
        self.polarization
    }

    /// Peukert exponent, >= 1.
    pub fn peukert(&self) -> f64 {
        self.peukert
    }

    /// Time constant of the first-order filter through which the rate law sees the pack
    /// current, s (0: the current of the instant).
    pub fn rate_window_s(&self) -> f64 {
        self.rate_window_s
    }

    /// Cutoff voltage, V.
    pub fn cutoff_v(&self) -> f64 {
        self.cutoff_v
    }

    /// Continuous discharge limit, A.
    pub fn max_current_a(&self) -> Option<f64> {
        self.max_current_a
    }

    /// Pulse discharge limit, A, and the longest pulse it allows, s.
    pub fn max_pulse(&self) -> Option<(f64, f64)> {
        self.max_pulse
    }

    /// Self-discharge at `self_discharge_ref_c`, fraction of rated capacity per second.
    pub fn self_discharge_per_s(&self) -> f64 {
        self.self_discharge_per_s
    }

    /// The temperature of `self_discharge_per_s`, °C.
    pub fn self_discharge_ref_c(&self) -> f64 {
        self.self_discharge_ref_c
    }

    /// How the self-discharge changes with temperature.
    pub fn self_discharge_law(&self) -> SelfDischargeLaw {
        self.self_discharge_law
    }

    /// Capacity factor against temperature (°C).
    pub fn temp_capacity(&self) -> &Table {
        &self.temp_capacity
    }

    /// Resistance factor against temperature (°C).
    pub fn temp_resistance(&self) -> &Table {
        &self.temp_resistance
    }

    /// Mass of one cell, kg (unknown when the cell does not give it).
    pub fn mass_kg(&self) -> Option<f64> {
        self.mass_kg
    }

    /// Outer size of one cell (unknown when the cell does not give it).
    pub fn size(&self) -> Option<CellSize> {
        self.size
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn arrhenius_factor_matches_the_published_form() {
        // Arrhenius (1889): k(T2) / k(T1) = exp(Ea / R (1/T1 - 1/T2)). REFERENCES C29 gives, for
        // Ea = 20 kJ/mol and T_ref = 25 °C, the resistance factors exp(Ea/R (1/T - 1/T_ref))
        // 2.093 at 0 °C and 0.6022 at 45 °C (computed there): a rate's factor is their inverse.
        let law = SelfDischargeLaw::Arrhenius {
            ea_j_per_mol: 20_000.0,
        };
        assert!((1.0 / law.factor(25.0, 0.0) - 2.093).abs() < 5e-4);
        assert!((1.0 / law.factor(25.0, 45.0) - 0.6022).abs() < 5e-5);
        assert!((law.factor(25.0, 25.0) - 1.0).abs() < 1e-15);
        // Ea = 50 kJ/mol from 25 °C to 60 °C: exp(50000 / 8.314462618 x (1/298.15 - 1/333.15))
        // = 8.322740 (computed here).
        let law = SelfDischargeLaw::Arrhenius {
            ea_j_per_mol: 50_000.0,
        };
        assert!((law.factor(25.0, 60.0) - 8.322_740_490_954_887).abs() < 1e-9);
        // At and below absolute zero nothing reacts.
        assert!(law.factor(25.0, -273.15).abs() < f64::MIN_POSITIVE);
    }

    #[test]
    fn doubling_every_ten_degrees_is_arrhenius_near_53_kj_per_mol() {
        // Doubling per 10 K at 25 °C is Ea = ln 2 x R x 298.15 x 308.15 / 10 = 52.95 kJ/mol
        // (solved from the Arrhenius ratio, computed here).
        let ea = std::f64::consts::LN_2 * GAS_CONSTANT * 298.15 * 308.15 / 10.0;
        let a = SelfDischargeLaw::Arrhenius { ea_j_per_mol: ea }.factor(25.0, 35.0);
        let d = SelfDischargeLaw::Doubling { every_k: 10.0 }.factor(25.0, 35.0);
        assert!((a - 2.0).abs() < 1e-12 && (d - 2.0).abs() < 1e-12);
        assert!((ea - 52_949.0).abs() < 1.0, "{ea}");
        for c in [
            Chemistry::LiIon,
            Chemistry::LiFePo4,
            Chemistry::NiMh,
            Chemistry::Alkaline,
            Chemistry::LiMnO2,
            Chemistry::LiSoCl2,
            Chemistry::LeadAcid,
        ] {
            assert_eq!(c.self_discharge_doubling_k(), Some(10.0), "{}", c.name());
        }
        assert_eq!(Chemistry::Other.self_discharge_doubling_k(), None);
    }
}
