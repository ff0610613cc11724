//! The serde mirror of a design file. Values are kept as written (quantities as text); the model
//! layer parses and checks them so that every problem of a file can be reported at once.

use indexmap::IndexMap;
use schemars::JsonSchema;
use serde::Deserialize;

use super::node::{Kind, Node, mismatch, reread};
use super::qty::{DrawSpec, Efficiency, Qty, ResistanceSpec, SelfDischargeSpec};
use super::tolerance::ToleranceSpec;

/// A whole design file.
#[derive(Debug, Clone, Deserialize, JsonSchema)]
#[serde(deny_unknown_fields)]
#[schemars(title = "joulepath design file")]
pub struct DesignSpec {
    /// Title of the design, shown in reports.
    #[serde(default)]
    pub design: Option<String>,
    /// Ambient temperature, e.g. `25 °C` (the default), or a climate: a yearly cycle of
    /// monthly means and a daily swing, or a recorded series read from a CSV file.
    #[serde(default)]
    pub ambient: Option<AmbientSpec>,
    /// Custom cells by name.
    #[serde(default)]
    pub cells: IndexMap<String, CellSpec>,
    /// The pack: which cell, how many in series and parallel, start state.
    pub battery: BatterySpec,
    /// Converters, regulators and switches.
    #[serde(default)]
    pub stages: Vec<StageSpec>,
    /// Everything that draws power.
    #[serde(default)]
    pub loads: Vec<LoadSpec>,
    /// Operating modes: mode name -> { load id: state, stage id: off }.
    #[serde(default)]
    pub modes: IndexMap<String, Option<IndexMap<String, String>>>,
    /// How the product spends its time, repeated until it stops.
    #[serde(default)]
    pub profile: Vec<StepSpec>,
    /// How values spread from unit to unit, by path (`loads.radio.draw.tx: ±5 %`): what
    /// `spread` samples and `size` takes the percentile over.
    #[serde(default)]
    pub tolerances: IndexMap<String, ToleranceSpec>,
}

/// Cell chemistry.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Deserialize, JsonSchema)]
#[serde(rename_all = "kebab-case")]
pub enum ChemistrySpec {
    /// Lithium-ion (cobalt, nickel or manganese oxide cathodes).
    LiIon,
    /// Lithium iron phosphate.
    Lifepo4,
    /// Nickel-metal hydride.
    Nimh,
    /// Alkaline zinc-manganese dioxide.
    Alkaline,
    /// Lithium-manganese dioxide primary (coin cells).
    LiMno2,
    /// Lithium-thionyl chloride primary.
    LiSocl2,
    /// Lead-acid.
    LeadAcid,
    /// Anything else.
    Other,
}

/// A cell: custom, or a preset with overrides (`preset:` names it).
#[derive(Debug, Clone, Default, Deserialize, JsonSchema)]
#[serde(deny_unknown_fields)]
pub struct CellSpec {
    /// A built-in preset this cell starts from; the other keys override it.
    #[serde(default)]
    pub preset: Option<String>,
    /// One line saying what cell this is (shown by `joulepath cells`).
    #[serde(default)]
    pub description: Option<String>,
    /// Chemistry (default `other`).
    #[serde(default)]
    pub chemistry: Option<ChemistrySpec>,
    /// Rated capacity, e.g. `600 mAh` (or an energy such as `2.2 Wh`).
    #[serde(default)]
    pub capacity: Option<Qty>,
    /// The current the capacity is rated at; default capacity / 5 h, for primary chemistries a
    /// light drain (alkaline capacity / 100 h, li-mno2 / 1000 h, li-socl2 / 2000 h).
    #[serde(default)]
    pub rated_current: Option<Qty>,
    /// Open-circuit voltage against state of charge: `[[SoC, V], ...]`.
    #[serde(default)]
    pub ocv: Option<Vec<Vec<Qty>>>,
    /// Ohmic internal resistance, one value or `[[SoC, R], ...]`.
    #[serde(default)]
    pub resistance: Option<ResistanceSpec>,
    /// Optional 1-RC polarization branch.
    #[serde(default)]
    pub polarization: Option<PolarizationSpec>,
    /// Peukert exponent (default 1.0).
    #[serde(default)]
    pub peukert: Option<Qty>,
    /// Time constant over which the rate law averages the pack current (a first-order filter),
    /// e.g. `5 min`; `0 s` applies it to the current of the instant (default 5 min for
    /// primary chemistries, 0 for the others).
    #[serde(default)]
    pub rate_window: Option<Qty>,
    /// End-of-discharge voltage per cell, under load.
    #[serde(default)]
    pub cutoff: Option<Qty>,
    /// Continuous discharge limit per cell.
    #[serde(default)]
    pub max_current: Option<Qty>,
    /// Pulse discharge limit per cell, for a mode held no longer than `max_pulse_length`.
    #[serde(default)]
    pub max_pulse_current: Option<Qty>,
    /// The longest pulse `max_pulse_current` allows, e.g. `100 ms`.
    #[serde(default)]
    pub max_pulse_length: Option<Qty>,
    /// Self-discharge of the rated capacity: `3 %/month` at every temperature, or
    /// `{ rate: 1 %/year, at: 20 °C, doubles_every: 10 °C }` following the temperature.
    #[serde(default)]
    pub self_discharge: Option<SelfDischargeSpec>,
    /// Capacity and resistance factors against temperature.
    #[serde(default)]
    pub temperature: Option<Vec<TemperatureRowSpec>>,
    /// Mass of one cell, e.g. `23 g` (used by `size` to rank packs).
    #[serde(default)]
    pub mass: Option<Qty>,
    /// Outer size of one cell: `[diameter, height]` of a cylinder (coin cells too), or
    /// `[length, width, height]` of a pouch or prismatic cell, e.g. `[14.5 mm, 50.5 mm]`.
    #[serde(default)]
    pub size: Option<Vec<Qty>>,
}

impl CellSpec {
    /// Read one cell from YAML text holding the keys of a `cells:` entry (how the built-in
    /// presets are stored).
    ///
    /// # Errors
    ///
    /// The reader's message, with its line and column, when the text is not such a cell.
    pub fn from_yaml(text: &str) -> Result<Self, String> {
        super::read_cell(text).map(|(cell, _)| cell)
    }
}

/// The 1-RC polarization branch of a cell.
#[derive(Debug, Clone, Deserialize, JsonSchema)]
#[serde(deny_unknown_fields)]
pub struct PolarizationSpec {
    /// Resistance of the RC branch.
    pub resistance: Qty,
    /// Its time constant R x C.
    pub time_constant: Qty,
}

/// One row of a cell's temperature table.
#[derive(Debug, Clone, Deserialize, JsonSchema)]
#[serde(deny_unknown_fields)]
pub struct TemperatureRowSpec {
    /// Temperature of the row.
    pub at: Qty,
    /// Capacity factor (default 100 %).
    #[serde(default)]
    pub capacity: Option<Qty>,
    /// Resistance factor (default 100 %).
    #[serde(default)]
    pub resistance: Option<Qty>,
}

/// The cell a pack is built from: a name or an inline definition.
#[derive(Debug, Clone, JsonSchema)]
#[schemars(untagged)]
pub enum CellRef {
    /// A key of `cells` or a built-in preset.
    Name(String),
    /// An inline cell (may start from a preset).
    Inline(Box<CellSpec>),
}

impl<'de> Deserialize<'de> for CellRef {
    fn deserialize<D: serde::Deserializer<'de>>(d: D) -> Result<Self, D::Error> {
        let v = Node::deserialize(d)?;
        match &v.kind {
            Kind::Str(s) => Ok(CellRef::Name(s.to_string())),
            Kind::Map(_) => reread(&v, "").map(|c| CellRef::Inline(Box::new(c))),
            _ => Err(mismatch(
                "a cell name or an inline cell mapping",
                &v.describe(),
            )),
        }
    }
}

/// The ambient: one temperature or a climate.
#[derive(Debug, Clone)]
pub enum AmbientSpec {
    /// The same temperature throughout: `20 °C`.
    Constant(Qty),
    /// A temperature that follows the seasons and the time of day.
    Climate(ClimateSpec),
}

impl<'de> Deserialize<'de> for AmbientSpec {
    fn deserialize<D: serde::Deserializer<'de>>(d: D) -> Result<Self, D::Error> {
        let v = Node::deserialize(d)?;
        match &v.kind {
            Kind::Map(_) => reread(&v, "").map(AmbientSpec::Climate),
            Kind::Seq(_) => Err(mismatch(
                "a temperature such as `20 °C`, a climate mapping (`mean` or `monthly`, `daily_range`) or a recorded ambient (`file: temps.csv`)",
                &v.describe(),
            )),
            _ => reread(&v, "").map(AmbientSpec::Constant),
        }
    }
}

impl JsonSchema for AmbientSpec {
    fn schema_name() -> std::borrow::Cow<'static, str> {
        "Ambient".into()
    }
    fn json_schema(g: &mut schemars::SchemaGenerator) -> schemars::Schema {
        let q = g.subschema_for::<Qty>();
        let c = g.subschema_for::<ClimateSpec>();
        schemars::json_schema!({
            "description": "The ambient temperature: one value (\"20 °C\"), a climate {mean or monthly, start_month, daily_range, warmest}, or a recorded ambient {file: temps.csv, repeat}.",
            "anyOf": [q, c]
        })
    }
}

/// An ambient that changes along the run. The run starts at midnight on the first day of
/// `start_month`.
#[derive(Debug, Clone, Default, Deserialize, JsonSchema)]
#[serde(deny_unknown_fields)]
pub struct ClimateSpec {
    /// The mean temperature, when there is no yearly cycle.
    #[serde(default)]
    pub mean: Option<Qty>,
    /// Twelve monthly mean temperatures, January first.
    #[serde(default)]
    pub monthly: Option<Vec<Qty>>,
    /// The month the run starts in, 1 (January) to 12 (default 1).
    #[serde(default)]
    pub start_month: Option<Qty>,
    /// Warmest less coldest hour of the day, e.g. `10 °C` (default 0: no daily swing).
    #[serde(default)]
    pub daily_range: Option<Qty>,
    /// Time of day of the warmest hour, after midnight, e.g. `15 h` (the default).
    #[serde(default)]
    pub warmest: Option<Qty>,
    /// A recorded ambient in place of the cycles: a CSV file of time and temperature
    /// (`time [h], temperature [°C]`), relative to the design file; straight lines between its
    /// rows.
    #[serde(default)]
    pub file: Option<String>,
    /// With `file`: start the file again after its last row (`true`), or hold its last
    /// temperature (`false`, the default).
    #[serde(default)]
    pub repeat: Option<bool>,
}

/// The pack.
#[derive(Debug, Clone, Deserialize, JsonSchema)]
#[serde(deny_unknown_fields)]
pub struct BatterySpec {
    /// The cell.
    pub cell: CellRef,
    /// Cells in series (default 1).
    #[serde(default)]
    pub series: Option<Qty>,
    /// Strings in parallel (default 1).
    #[serde(default)]
    pub parallel: Option<Qty>,
    /// State of charge at the start (default 100 %).
    #[serde(default)]
    pub start: Option<Qty>,
    /// Aging factors.
    #[serde(default)]
    pub aging: Option<AgingSpec>,
    /// A buffer capacitor across the pack.
    #[serde(default)]
    pub buffer: Option<BufferSpec>,
}

/// A buffer capacitor across the pack (bulk, supercapacitor or hybrid layer capacitor): it
/// supplies the pulses and is recharged from the cells, optionally through a current limiter.
#[derive(Debug, Clone, Deserialize, JsonSchema)]
#[serde(deny_unknown_fields)]
pub struct BufferSpec {
    /// Capacitance.
    pub capacitance: Qty,
    /// Equivalent series resistance (default 0).
    #[serde(default)]
    pub esr: Option<Qty>,
    /// Leakage current (default 0).
    #[serde(default)]
    pub leakage: Option<Qty>,
    /// The most current the cells give, through a current limiter between the cells and the
    /// capacitor (default: no limiter, the capacitor sits directly across the cells).
    #[serde(default)]
    pub current_limit: Option<Qty>,
}

/// Aging factors of the pack.
#[derive(Debug, Clone, Deserialize, JsonSchema)]
#[serde(deny_unknown_fields)]
pub struct AgingSpec {
    /// Remaining capacity (default 100 %).
    #[serde(default)]
    pub capacity: Option<Qty>,
    /// Resistance relative to new (default 100 %).
    #[serde(default)]
    pub resistance: Option<Qty>,
}

/// Stage kinds.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Deserialize, JsonSchema)]
#[serde(rename_all = "kebab-case")]
pub enum StageKindSpec {
    /// Step-down switching converter.
    Buck,
    /// Step-up switching converter.
    Boost,
    /// Switching converter that regulates above and below its input.
    BuckBoost,
    /// Linear (low-dropout) regulator.
    Linear,
    /// Load switch.
    Switch,
    /// Constant-current LED driver: sets the current of the LED string on its rail.
    LedDriver,
}

/// How an LED driver regulates its current.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Deserialize, JsonSchema)]
#[serde(rename_all = "kebab-case")]
pub enum LedTopologySpec {
    /// A linear current sink or source: input current = LED current + quiescent; needs
    /// `headroom` above the LEDs' voltage.
    Linear,
    /// A step-down switching driver: needs `headroom`, takes `efficiency` or `loss`.
    Buck,
    /// A step-up switching driver: takes `efficiency` or `loss`; above the LEDs' voltage it
    /// passes its input through.
    Boost,
    /// A switching driver that regulates above and below its input.
    BuckBoost,
}

/// Where a switching stage draws its quiescent current.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Deserialize, JsonSchema)]
#[serde(rename_all = "kebab-case")]
pub enum QuiescentFromSpec {
    /// From its input: Vin x quiescent (the default).
    Input,
    /// From its output, through the converter: a load of `quiescent` on its own output.
    Output,
}

/// One stage: a converter, regulator or switch.
#[derive(Debug, Clone, Deserialize, JsonSchema)]
#[serde(deny_unknown_fields)]
pub struct StageSpec {
    /// Unique id.
    pub id: String,
    /// Kind of stage.
    pub kind: StageKindSpec,
    /// `battery` or the id of the stage feeding this one.
    pub input: String,
    /// Regulation setpoint (not for `switch` or `led-driver`).
    #[serde(default)]
    pub output: Option<Qty>,
    /// LED driver: the LED current it holds, e.g. `350 mA`.
    #[serde(default)]
    pub current: Option<Qty>,
    /// LED driver: `linear` (the default), `buck`, `boost` or `buck-boost`.
    #[serde(default)]
    pub topology: Option<LedTopologySpec>,
    /// LED driver, linear or buck: least input voltage above the LEDs' that holds the current
    /// (default 0.2 V linear, 0.1 V buck).
    #[serde(default)]
    pub headroom: Option<Qty>,
    /// Efficiency: a constant, one curve `[[I, eta], ...]` or curves per input voltage.
    #[serde(default)]
    pub efficiency: Option<Efficiency>,
    /// Loss terms instead of an efficiency.
    #[serde(default)]
    pub loss: Option<LossSpec>,
    /// Input current at zero load while enabled.
    #[serde(default)]
    pub quiescent: Option<Qty>,
    /// Switching stages: where the quiescent current is drawn, `input` (the default) or
    /// `output` (through the converter, as small boosts supply themselves).
    #[serde(default)]
    pub quiescent_from: Option<QuiescentFromSpec>,
    /// Input current while disabled by a mode.
    #[serde(default)]
    pub shutdown: Option<Qty>,
    /// `[min, max]` input voltage.
    #[serde(default)]
    pub input_range: Option<Vec<Qty>>,
    /// Output current rating.
    #[serde(default)]
    pub max_output_current: Option<Qty>,
    /// Switching stages: the most input current the converter draws while regulating (its
    /// switch current limit, as seen at its input); above it the output voltage falls.
    #[serde(default)]
    pub input_current_limit: Option<Qty>,
    /// Buck and linear: least input-output difference that keeps regulation.
    #[serde(default)]
    pub dropout: Option<Qty>,
    /// Boost: input-output difference in bypass.
    #[serde(default)]
    pub bypass_drop: Option<Qty>,
    /// Boost: resistance of a synchronous pass-through in bypass (Vout = Vin - drop - Iout R).
    #[serde(default)]
    pub bypass_resistance: Option<Qty>,
    /// Switch: on resistance.
    #[serde(default)]
    pub on_resistance: Option<Qty>,
    /// Switching stages with an `input_current_limit`: a buffer capacitor on the stage's output
    /// rail, recharged by the stage at its limit (`current_limit` is not taken: the stage's
    /// limit is the limiter).
    #[serde(default)]
    pub buffer: Option<BufferSpec>,
    /// Junction-to-ambient thermal resistance.
    #[serde(default)]
    pub theta_ja: Option<Qty>,
    /// Maximum junction temperature (default 125 °C).
    #[serde(default)]
    pub tj_max: Option<Qty>,
}

/// Loss terms of a switching stage: L = Vin x quiescent + drop x Iout + resistance x Iout^2.
#[derive(Debug, Clone, Deserialize, JsonSchema)]
#[serde(deny_unknown_fields)]
pub struct LossSpec {
    /// Proportional term (a voltage).
    #[serde(default)]
    pub drop: Option<Qty>,
    /// Conduction term (a resistance).
    #[serde(default)]
    pub resistance: Option<Qty>,
}

/// A load.
#[derive(Debug, Clone, Deserialize, JsonSchema)]
#[serde(deny_unknown_fields)]
pub struct LoadSpec {
    /// Unique id.
    pub id: String,
    /// `battery` or a stage id.
    pub rail: String,
    /// `[min, max]` supply voltage the load needs.
    #[serde(default)]
    pub voltage_range: Option<Vec<Qty>>,
    /// State name -> draw: a current, a power or a resistance, or a measured capture
    /// `{ capture: FILE.csv }`.
    pub draw: IndexMap<String, DrawSpec>,
    /// State when a mode does not name the load (default `off`).
    #[serde(default)]
    pub default: Option<String>,
}

/// One profile item: `{mode, for}` or `{repeat: [...], for | times}`.
#[derive(Debug, Clone, Deserialize, JsonSchema)]
#[serde(deny_unknown_fields)]
pub struct StepSpec {
    /// The mode of a plain step.
    #[serde(default)]
    pub mode: Option<String>,
    /// Duration of a step, or of a repeat block; `capture` for one capture of the step's mode.
    #[serde(default, rename = "for")]
    #[schemars(schema_with = "super::qty::step_for_schema")]
    pub duration: Option<Qty>,
    /// Steps of a repeat block.
    #[serde(default)]
    pub repeat: Option<Vec<StepSpec>>,
    /// Number of passes of a repeat block.
    #[serde(default)]
    pub times: Option<Qty>,
}
