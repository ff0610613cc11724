//! The pack built from cells: series and parallel counts, start state and aging.

use super::cell::Cell;

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
    pub(crate) cell: Cell,
    /// Cells in series.
    pub(crate) series: u32,
    /// Strings in parallel.
    pub(crate) parallel: u32,
    /// SoC at the start, 0..1.
    pub(crate) start_soc: f64,
    /// Remaining capacity factor from aging.
    pub(crate) aging_capacity: f64,
    /// Resistance factor from aging.
    pub(crate) aging_resistance: f64,
    /// A buffer capacitor across the pack, if any.
    pub(crate) buffer: Option<Buffer>,
}

/// A buffer capacitor across the pack: the node the tree draws from is the capacitor's, and
/// the cells feed it, directly or through a current limiter.
///
/// # Formula
///
/// With the cells' open-circuit voltage less polarization E, their resistance R, the capacitor
/// voltage x, its series resistance Rc and the node's total current I (the tree's plus the
/// leakage), the cells give I_b = (E - x + Rc I) / (R + Rc), held to [0, limit] with a limiter,
/// and the capacitor the rest; the node is at x - Rc (I - I_b). The capacitor voltage follows
/// C dx/dt = I_b - I (Kirchhoff's laws on the two branches; textbook circuit theory).
///
/// Its fields are public: a `Buffer` built outside the checker cannot be put into a `Pack`.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Buffer {
    /// Capacitance, F.
    pub capacitance: f64,
    /// Equivalent series resistance, ohm.
    pub esr: f64,
    /// Leakage current, A, drawn at the node.
    pub leakage: f64,
    /// The most current the cells give through the limiter, A; `None`: no limiter (the
    /// capacitor sits across the cells, and current may flow back into them).
    pub current_limit: Option<f64>,
}

impl Pack {
    /// One new cell alone, full, unaged (a cell comes only from a preset or a checked design,
    /// so the pack is as sound as they are).
    pub fn one_cell(cell: Cell) -> Self {
        Self {
            cell,
            series: 1,
            parallel: 1,
            start_soc: 1.0,
            aging_capacity: 1.0,
            aging_resistance: 1.0,
            buffer: None,
        }
    }

    /// The factor of the cell's tabulated resistance at ambient `ambient_c` (strings, the
    /// temperature table, aging): [`Pack::r0`] is the table at the SoC times it.
    pub(crate) fn scale_r(&self, ambient_c: f64) -> f64 {
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
        self.r0_scaled(s, self.scale_r(ambient_c))
    }

    /// [`Pack::r0`] at SoC `s` with the factor `scale` already read ([`Pack::scale_r`]): the
    /// same value, for a caller that reads many states at one ambient.
    pub(crate) fn r0_scaled(&self, s: f64, scale: f64) -> f64 {
        self.cell.resistance.at(s) * scale
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

    /// Pack pulse current limit, A, and the longest pulse it allows, s.
    pub fn max_pulse(&self) -> Option<(f64, f64)> {
        self.cell
            .max_pulse
            .map(|(i, t)| (i * f64::from(self.parallel), t))
    }

    /// Current of the pack's capacity rating.
    pub fn rated_current_a(&self) -> f64 {
        self.cell.rated_current_a * f64::from(self.parallel)
    }

    /// Self-discharge current at `temp_c` (°C): the cell's rate at that temperature x parallel
    /// x rated capacity (no aging factor).
    pub fn self_discharge_a(&self, temp_c: f64) -> f64 {
        self.cell.self_discharge_at(temp_c) * f64::from(self.parallel) * self.cell.capacity_c
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

/// Read access to the checked values (the fields stay private: only the checker builds a `Pack`).
impl Pack {
    /// The cell.
    pub fn cell(&self) -> &Cell {
        &self.cell
    }

    /// Cells in series.
    pub fn series(&self) -> u32 {
        self.series
    }

    /// Strings in parallel.
    pub fn parallel(&self) -> u32 {
        self.parallel
    }

    /// SoC at the start, 0..1.
    pub fn start_soc(&self) -> f64 {
        self.start_soc
    }

    /// Remaining capacity factor from aging.
    pub fn aging_capacity(&self) -> f64 {
        self.aging_capacity
    }

    /// Resistance factor from aging.
    pub fn aging_resistance(&self) -> f64 {
        self.aging_resistance
    }

    /// The buffer capacitor across the pack, if any.
    pub fn buffer(&self) -> Option<Buffer> {
        self.buffer
    }
}
