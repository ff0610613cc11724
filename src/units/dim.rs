//! The kinds of physical value and the parsed quantity type.

/// The physical kind of a value.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash)]
pub enum Dim {
    /// Electric potential, stored in volts.
    Voltage,
    /// Electric current, stored in amperes.
    Current,
    /// Power, stored in watts.
    Power,
    /// Electrical resistance, stored in ohms.
    Resistance,
    /// Electric charge, stored in coulombs (1 Ah = 3600 C).
    Charge,
    /// Energy, stored in joules (1 Wh = 3600 J).
    Energy,
    /// A duration, stored in seconds.
    Time,
    /// A temperature, stored in degrees Celsius.
    Temperature,
    /// Thermal resistance, stored in kelvin per watt.
    ThermalResistance,
    /// A dimensionless ratio, stored as a fraction of one (`91 %` is 0.91).
    Fraction,
    /// A fraction lost per unit of time, stored per second.
    Rate,
    /// A plain number without a unit (exponents, counts).
    Number,
    /// A mass, stored in kilograms (`g`, `kg`, `mg`).
    Mass,
    /// A length, stored in metres (`mm`, `cm`, `m`).
    Length,
    /// An energy per amount of substance (an activation energy), stored in joules per mole.
    MolarEnergy,
    /// Capacitance, stored in farads (`F`, `mF`, `µF`).
    Capacitance,
}

impl Dim {
    /// The kind of value with its article, for messages: "a voltage", "an energy".
    pub fn noun(self) -> &'static str {
        match self {
            Dim::Voltage => "a voltage",
            Dim::Current => "a current",
            Dim::Power => "a power",
            Dim::Resistance => "a resistance",
            Dim::Charge => "a charge",
            Dim::Energy => "an energy",
            Dim::Time => "a duration",
            Dim::Temperature => "a temperature",
            Dim::ThermalResistance => "a thermal resistance",
            Dim::Fraction => "a fraction",
            Dim::Rate => "a rate per time",
            Dim::Number => "a plain number",
            Dim::Mass => "a mass",
            Dim::Length => "a length",
            Dim::MolarEnergy => "an energy per mole",
            Dim::Capacitance => "a capacitance",
        }
    }

    /// A typical, correctly written value of this kind, such as `"120 mA"`.
    pub fn example(self) -> &'static str {
        match self {
            Dim::Voltage => "3.3 V",
            Dim::Current => "120 mA",
            Dim::Power => "250 mW",
            Dim::Resistance => "50 mΩ",
            Dim::Charge => "1200 mAh",
            Dim::Energy => "8.4 Wh",
            Dim::Time => "5 ms",
            Dim::Temperature => "25 °C",
            Dim::ThermalResistance => "60 °C/W",
            Dim::Fraction => "91 %",
            Dim::Rate => "3 %/month",
            Dim::Number => "1.05",
            Dim::Mass => "23 g",
            Dim::Length => "14.5 mm",
            Dim::MolarEnergy => "50 kJ/mol",
            Dim::Capacitance => "470 µF",
        }
    }

    /// A few everyday spellings, listed in hints.
    pub(super) fn common_units(self) -> &'static str {
        match self {
            Dim::Voltage => "`V`, `mV`",
            Dim::Current => "`A`, `mA`, `µA`",
            Dim::Power => "`W`, `mW`, `µW`",
            Dim::Resistance => "`Ω`, `mΩ`, `kΩ`, `ohm`",
            Dim::Charge => "`Ah`, `mAh`",
            Dim::Energy => "`Wh`, `mWh`, `J`",
            Dim::Time => "`ms`, `s`, `min`, `h`, `d`",
            Dim::Temperature => "`°C`, `degC`, `K`",
            Dim::ThermalResistance => "`°C/W`, `K/W`",
            Dim::Fraction => "`%` or a plain number such as `0.91`",
            Dim::Rate => "`%/month`, `%/year`, `%/d`",
            Dim::Number => "no unit at all",
            Dim::Mass => "`g`, `kg`, `mg`",
            Dim::Length => "`mm`, `cm`, `m`",
            Dim::MolarEnergy => "`kJ/mol`, `J/mol`, `eV`",
            Dim::Capacitance => "`F`, `mF`, `µF`",
        }
    }
}

/// A parsed value together with its kind; the value is always in SI units
/// (see [`Dim`] for the unit each kind is stored in).
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Quantity {
    value: f64,
    dim: Dim,
}

impl Quantity {
    /// Wraps a value that is already in the SI unit of `dim`.
    pub fn new(value: f64, dim: Dim) -> Self {
        Quantity { value, dim }
    }

    /// The value in the SI unit of its kind.
    pub fn value(self) -> f64 {
        self.value
    }

    /// The kind of the value.
    pub fn dim(self) -> Dim {
        self.dim
    }
}
