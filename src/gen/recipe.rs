//! The channel recipe language: one string describes one output channel.
//!
//! Grammar (our own small syntax, parsed by hand):
//!
//! ```text
//! recipe := KIND [ ":" FREQ ] [ "@" LEVEL ] { "," KEY "=" VALUE }
//! FREQ   := number | number "+" number        (the pair only for `twin` and `smpte`)
//! LEVEL  := sweep                              (a range only for `sine`)
//! sweep  := number | number ".." number | number ".." number "/" STEPS
//! ```
//!
//! `brink gen --help` says what each kind and key means.

use std::fmt;
use std::str::FromStr;

use super::GenError;

/// Default level in dBFS when a recipe gives none.
pub const DEFAULT_LEVEL_DB: f64 = -20.0;
/// Default frequency of the single-tone kinds: the AES17 test frequency, 997 Hz.
pub const DEFAULT_FREQ_HZ: f64 = 997.0;
/// Default tone pair of `twin` (the 19 kHz + 20 kHz twin-tone test).
pub const DEFAULT_TWIN_HZ: (f64, f64) = (19000.0, 20000.0);
/// Default tone pair of `smpte`: 60 Hz + 7 kHz (SMPTE RP120).
pub const DEFAULT_SMPTE_HZ: (f64, f64) = (60.0, 7000.0);
/// Default amplitude ratio of `smpte`, low tone over high tone: 4:1 (SMPTE RP120).
pub const DEFAULT_SMPTE_RATIO: f64 = 4.0;
/// Default drive of `clip` and `soft`, dB.
pub const DEFAULT_DRIVE_DB: f64 = 6.0;
/// Highest harmonic order `harmonics` accepts.
pub const MAX_HARMONIC_ORDER: u32 = 40;
/// Most steps a stepped sweep may have.
pub const MAX_STEPS: u32 = 10_000;

/// Accepted level range, dBFS (levels above 0 dBFS are allowed: float files keep them).
const LEVEL_RANGE: (f64, f64) = (-300.0, 40.0);

/// The signal kinds, in the order help and error messages list them.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Kind {
    /// Pure sine.
    Sine,
    /// Fundamental plus exact harmonics (Chebyshev sum).
    Harmonics,
    /// Band-limited square wave.
    Square,
    /// Band-limited triangle wave.
    Triangle,
    /// Band-limited sawtooth.
    Saw,
    /// Hard-clipped sine.
    Clip,
    /// Sine through a biased tanh stage.
    Soft,
    /// Two sines.
    Twin,
    /// Two sines with the SMPTE RP120 defaults (60 Hz + 7 kHz at 4:1); renders as `twin`.
    Smpte,
    /// Gaussian white noise.
    Noise,
    /// Nothing (useful with `dc=` or `noise=`).
    Silence,
}

impl Kind {
    /// Every kind.
    pub const ALL: [Kind; 11] = [
        Kind::Sine,
        Kind::Harmonics,
        Kind::Square,
        Kind::Triangle,
        Kind::Saw,
        Kind::Clip,
        Kind::Soft,
        Kind::Twin,
        Kind::Smpte,
        Kind::Noise,
        Kind::Silence,
    ];

    /// The name used in recipes.
    pub fn name(self) -> &'static str {
        match self {
            Kind::Sine => "sine",
            Kind::Harmonics => "harmonics",
            Kind::Square => "square",
            Kind::Triangle => "triangle",
            Kind::Saw => "saw",
            Kind::Clip => "clip",
            Kind::Soft => "soft",
            Kind::Twin => "twin",
            Kind::Smpte => "smpte",
            Kind::Noise => "noise",
            Kind::Silence => "silence",
        }
    }

    fn from_name(s: &str) -> Result<Kind, GenError> {
        Kind::ALL
            .into_iter()
            .find(|k| k.name() == s)
            .ok_or_else(|| GenError::UnknownKind {
                kind: s.to_string(),
                known: Kind::ALL.map(Kind::name).join(", "),
            })
    }

    /// Keys this kind accepts (`hN` stands for `h2`..`h40`).
    fn keys(self) -> &'static [&'static str] {
        const ALL_COMMON: &[&str] = &["noise", "dc", "phase", "start", "stop", "fade"];
        match self {
            Kind::Sine => ALL_COMMON,
            Kind::Harmonics => &["hN", "noise", "dc", "phase", "start", "stop", "fade"],
            Kind::Square | Kind::Triangle | Kind::Saw => {
                &["limit", "noise", "dc", "phase", "start", "stop", "fade"]
            }
            Kind::Clip => &["drive", "noise", "dc", "phase", "start", "stop", "fade"],
            Kind::Soft => &[
                "drive", "bias", "noise", "dc", "phase", "start", "stop", "fade",
            ],
            Kind::Twin | Kind::Smpte => &["ratio", "noise", "dc", "phase", "start", "stop", "fade"],
            Kind::Noise => &["dc", "start", "stop", "fade"],
            Kind::Silence => &["noise", "dc", "start", "stop", "fade"],
        }
    }

    fn accepts(self, key: &str) -> bool {
        let generic = if harmonic_order(key).is_some() {
            "hN"
        } else {
            key
        };
        self.keys().contains(&generic)
    }
}

impl fmt::Display for Kind {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        f.write_str(self.name())
    }
}

/// A value that is constant, or changes over the channel's active span (`start`..`stop`).
#[derive(Debug, Clone, Copy, PartialEq)]
pub enum Sweep {
    /// One value throughout (`6`).
    Fixed(f64),
    /// Linear from `from` on the first active sample to `to` on the last (`0..12`).
    Ramp {
        /// Value on the first active sample.
        from: f64,
        /// Value on the last active sample.
        to: f64,
    },
    /// `steps` equally long, piecewise-constant steps with values evenly spaced from `from` to
    /// `to` inclusive (`0..12/5` gives 0, 3, 6, 9, 12).
    Steps {
        /// First step's value.
        from: f64,
        /// Last step's value.
        to: f64,
        /// Number of steps (at least 2).
        steps: u32,
    },
}

impl Sweep {
    /// The value at active sample `pos` of a span `len` samples long.
    pub fn at(&self, pos: usize, len: usize) -> f64 {
        match *self {
            Sweep::Fixed(v) => v,
            Sweep::Ramp { from, to } => {
                if len <= 1 {
                    from
                } else {
                    from + (to - from) * (pos as f64 / (len - 1) as f64)
                }
            }
            Sweep::Steps { from, to, steps } => {
                let len = len.max(1) as u128;
                let k = ((pos as u128 * steps as u128) / len).min(steps as u128 - 1) as f64;
                from + (to - from) * k / (steps - 1) as f64
            }
        }
    }

    /// Whether the value is the same on every sample.
    pub fn is_fixed(&self) -> bool {
        matches!(self, Sweep::Fixed(_))
    }

    fn endpoints(&self) -> [f64; 2] {
        match *self {
            Sweep::Fixed(v) => [v, v],
            Sweep::Ramp { from, to } | Sweep::Steps { from, to, .. } => [from, to],
        }
    }
}

impl fmt::Display for Sweep {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match self {
            Sweep::Fixed(v) => write!(f, "{v}"),
            Sweep::Ramp { from, to } => write!(f, "{from}..{to}"),
            Sweep::Steps { from, to, steps } => write!(f, "{from}..{to}/{steps}"),
        }
    }
}

/// The band-limited periodic waveforms.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Wave {
    /// (4/π) Σ_odd sin(nωt)/n.
    Square,
    /// (8/π²) Σ_odd (−1)^((n−1)/2) sin(nωt)/n².
    Triangle,
    /// (2/π) Σ (−1)^(n+1) sin(nωt)/n (rising ramp).
    Saw,
}

impl Wave {
    fn kind(self) -> Kind {
        match self {
            Wave::Square => Kind::Square,
            Wave::Triangle => Kind::Triangle,
            Wave::Saw => Kind::Saw,
        }
    }
}

/// One harmonic of a `harmonics` recipe.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Harmonic {
    /// Order, 2..=40.
    pub order: u32,
    /// Amplitude relative to the fundamental, dBc.
    pub dbc: f64,
}

/// What a channel's signal is, with the values specific to its kind.
#[derive(Debug, Clone, PartialEq)]
pub enum Shape {
    /// `sine:FREQ@LEVEL`: `A·sin(ωt + phase)`, `A` = peak; the level may sweep.
    Sine {
        /// Hz.
        freq: f64,
        /// Peak dBFS.
        level: Sweep,
    },
    /// `harmonics:FREQ@LEVEL,hN=DBC...`: `A·Σ a_n·T_n(cos(ωt + phase))`, all in cosine phase.
    Harmonics {
        /// Fundamental, Hz.
        freq: f64,
        /// Peak of the *fundamental*, dBFS.
        level: f64,
        /// Harmonics, sorted by order.
        orders: Vec<Harmonic>,
    },
    /// `square`, `triangle`, `saw`: Fourier series up to the last harmonic below the limit.
    Wave {
        /// Which waveform.
        wave: Wave,
        /// Fundamental, Hz.
        freq: f64,
        /// Peak of the band-limited waveform, dBFS.
        level: f64,
        /// `limit=HZ`: highest harmonic frequency allowed (also capped at 98 % of Nyquist).
        limit: Option<f64>,
    },
    /// `clip:FREQ@LEVEL,drive=DB`: a sine `drive` dB above the clip point, hard-clipped.
    Clip {
        /// Hz.
        freq: f64,
        /// Plateau (clip point) in dBFS.
        level: f64,
        /// dB of sine peak above the clip point; may sweep.
        drive: Sweep,
    },
    /// `soft:FREQ@LEVEL,drive=DB,bias=B`: `tanh(g(x+bias)) − tanh(g·bias)`, `g = 10^(drive/20)`.
    Soft {
        /// Hz.
        freq: f64,
        /// Output peak, dBFS.
        level: f64,
        /// Gain into the tanh, dB; may sweep.
        drive: Sweep,
        /// Offset added to the unit sine before the tanh (−1..=1).
        bias: f64,
    },
    /// `twin:F1+F2@LEVEL,ratio=R`: `A1·sin(ω1 t) + A2·sin(ω2 t)`, `A1:A2 = R:1`, `A1 + A2` = peak.
    /// `smpte` parses to this shape too, with its own defaults.
    Twin {
        /// First tone, Hz.
        f1: f64,
        /// Second tone, Hz.
        f2: f64,
        /// `A1 + A2` in dBFS.
        level: f64,
        /// `A1 / A2`.
        ratio: f64,
    },
    /// `noise@LEVEL`: Gaussian white noise, LEVEL = RMS in dBFS after AES17.
    Noise {
        /// AES17 RMS dBFS (`20·log10(√2·rms)`).
        level: f64,
    },
    /// `silence`.
    Silence,
}

impl Shape {
    /// The kind this shape is.
    pub fn kind(&self) -> Kind {
        match self {
            Shape::Sine { .. } => Kind::Sine,
            Shape::Harmonics { .. } => Kind::Harmonics,
            Shape::Wave { wave, .. } => wave.kind(),
            Shape::Clip { .. } => Kind::Clip,
            Shape::Soft { .. } => Kind::Soft,
            Shape::Twin { .. } => Kind::Twin,
            Shape::Noise { .. } => Kind::Noise,
            Shape::Silence => Kind::Silence,
        }
    }
}

/// Keys every kind shares (some kinds refuse some of them, see `brink gen --help`).
#[derive(Debug, Clone, PartialEq, Default)]
pub struct Common {
    /// `noise=DB`: Gaussian noise added after shaping, AES17 RMS dBFS.
    pub noise_db: Option<f64>,
    /// `dc=X`: offset added after shaping (linear, full scale 1).
    pub dc: f64,
    /// `phase=DEG`: start phase of the fundamental at the start of the active span.
    pub phase_deg: f64,
    /// `start=S`: seconds of silence before the signal.
    pub start_s: Option<f64>,
    /// `stop=S`: the signal ends here (seconds from the file start).
    pub stop_s: Option<f64>,
    /// `fade=MS`: raised-cosine fade in and out at the active span's edges.
    pub fade_ms: f64,
}

/// One parsed channel recipe.
#[derive(Debug, Clone, PartialEq)]
pub struct Recipe {
    /// The kind and its specific values.
    pub shape: Shape,
    /// Shared keys.
    pub common: Common,
}

/// Parse one channel recipe, e.g. `sine:997@-20` or `clip:997@-6,drive=0..12/5`.
pub fn parse_recipe(s: &str) -> Result<Recipe, GenError> {
    Parser { text: s.trim() }.parse()
}

impl FromStr for Recipe {
    type Err = GenError;

    fn from_str(s: &str) -> Result<Self, Self::Err> {
        parse_recipe(s)
    }
}

/// `hN` → `Some(N)` for any digits; the range is checked by the caller.
fn harmonic_order(key: &str) -> Option<u32> {
    let digits = key.strip_prefix('h')?;
    if digits.is_empty() || !digits.bytes().all(|b| b.is_ascii_digit()) {
        return None;
    }
    // Absurdly long digit strings fail to parse; report them as out of range too.
    Some(digits.parse().unwrap_or(u32::MAX))
}

struct Parser<'a> {
    text: &'a str,
}

impl Parser<'_> {
    fn bad(&self, what: &'static str, value: &str) -> GenError {
        GenError::BadValue {
            what,
            value: value.to_string(),
            recipe: self.text.to_string(),
        }
    }

    fn invalid(&self, msg: String) -> GenError {
        GenError::Recipe {
            message: msg,
            recipe: self.text.to_string(),
        }
    }

    fn number(&self, what: &'static str, s: &str) -> Result<f64, GenError> {
        let t = s.trim();
        // Rust also parses "inf" and "NaN"; a recipe wants plain finite decimals.
        match t.parse::<f64>() {
            Ok(v) if v.is_finite() => Ok(v),
            _ => Err(self.bad(what, s)),
        }
    }

    fn in_range(
        &self,
        what: &'static str,
        v: f64,
        lo: f64,
        hi: f64,
        unit: &str,
    ) -> Result<f64, GenError> {
        if v >= lo && v <= hi {
            Ok(v)
        } else {
            Err(self.invalid(format!("{what} {v} is out of range ({lo} to {hi}{unit})")))
        }
    }

    fn sweep(&self, what: &'static str, s: &str) -> Result<Sweep, GenError> {
        let Some((from, rest)) = s.split_once("..") else {
            return Ok(Sweep::Fixed(self.number(what, s)?));
        };
        let from = self.number(what, from).map_err(|_| self.bad(what, s))?;
        match rest.split_once('/') {
            None => {
                let to = self.number(what, rest).map_err(|_| self.bad(what, s))?;
                Ok(Sweep::Ramp { from, to })
            }
            Some((to, steps)) => {
                let to = self.number(what, to).map_err(|_| self.bad(what, s))?;
                let steps: u32 = steps
                    .trim()
                    .parse()
                    .map_err(|_| self.bad("step count", steps))?;
                if !(2..=MAX_STEPS).contains(&steps) {
                    return Err(self.invalid(format!(
                        "step count {steps} is out of range (2 to {MAX_STEPS})"
                    )));
                }
                Ok(Sweep::Steps { from, to, steps })
            }
        }
    }

    fn positive(&self, what: &'static str, s: &str) -> Result<f64, GenError> {
        let v = self.number(what, s)?;
        if v > 0.0 {
            Ok(v)
        } else {
            Err(self.invalid(format!("{what} must be above zero, got {v}")))
        }
    }

    fn parse(&self) -> Result<Recipe, GenError> {
        let mut parts = self.text.split(',');
        let head = parts.next().unwrap_or_default();
        let (kind_freq, level_txt) = match head.split_once('@') {
            Some((k, l)) => (k, Some(l)),
            None => (head, None),
        };
        let (kind_txt, freq_txt) = match kind_freq.split_once(':') {
            Some((k, f)) => (k, Some(f)),
            None => (kind_freq, None),
        };
        let kind = Kind::from_name(kind_txt.trim())?;

        // Keys: collect first, so unknown and duplicate keys are reported before values.
        let mut keys: Vec<(&str, &str)> = Vec::new();
        for part in parts {
            let (k, v) = part
                .split_once('=')
                .ok_or_else(|| self.invalid(format!("expected key=value, got '{part}'")))?;
            let k = k.trim();
            if !kind.accepts(k) {
                return Err(GenError::UnknownKey {
                    key: k.to_string(),
                    kind: kind.name(),
                    allowed: kind.keys().join(", "),
                });
            }
            if keys.iter().any(|(seen, _)| *seen == k) {
                return Err(GenError::DuplicateKey {
                    key: k.to_string(),
                    recipe: self.text.to_string(),
                });
            }
            keys.push((k, v.trim()));
        }
        let get = |name: &str| keys.iter().find(|(k, _)| *k == name).map(|(_, v)| *v);

        // Frequency.
        let freq = match (kind, freq_txt) {
            (Kind::Noise | Kind::Silence, Some(_)) => {
                return Err(self.invalid(format!("{kind} takes no frequency")));
            }
            (Kind::Twin | Kind::Smpte, _) => None,
            (_, Some(f)) => Some(self.positive("frequency", f)?),
            (_, None) => Some(DEFAULT_FREQ_HZ),
        };
        let freq = freq.unwrap_or(DEFAULT_FREQ_HZ);

        // Level.
        if kind == Kind::Silence && level_txt.is_some() {
            return Err(self.invalid("silence takes no level".to_string()));
        }
        let level_sweep = match level_txt {
            None => Sweep::Fixed(DEFAULT_LEVEL_DB),
            Some(l) => {
                let sw = self.sweep("level", l)?;
                for v in sw.endpoints() {
                    self.in_range("level", v, LEVEL_RANGE.0, LEVEL_RANGE.1, " dB")?;
                }
                sw
            }
        };
        let level = match level_sweep {
            Sweep::Fixed(v) => v,
            _ if kind == Kind::Sine => 0.0,
            _ => {
                return Err(self.invalid(format!(
                    "level range '{}' is only allowed for sine",
                    level_txt.unwrap_or_default()
                )));
            }
        };

        let drive = || -> Result<Sweep, GenError> {
            let Some(d) = get("drive") else {
                return Ok(Sweep::Fixed(DEFAULT_DRIVE_DB));
            };
            let sw = self.sweep("drive", d)?;
            let (lo, hi) = if kind == Kind::Clip {
                (0.0, 60.0)
            } else {
                (-60.0, 60.0)
            };
            for v in sw.endpoints() {
                self.in_range("drive", v, lo, hi, " dB")?;
            }
            Ok(sw)
        };

        let shape = match kind {
            Kind::Sine => Shape::Sine {
                freq,
                level: level_sweep,
            },
            Kind::Harmonics => {
                let mut orders = Vec::new();
                for (k, v) in &keys {
                    if let Some(order) = harmonic_order(k) {
                        if !(2..=MAX_HARMONIC_ORDER).contains(&order) {
                            return Err(self.invalid(format!(
                                "harmonic order '{k}' is out of range (h2 to h{MAX_HARMONIC_ORDER})"
                            )));
                        }
                        let dbc = self.number("harmonic level", v)?;
                        self.in_range("harmonic level", dbc, -300.0, 40.0, " dBc")?;
                        orders.push(Harmonic { order, dbc });
                    }
                }
                orders.sort_by_key(|h| h.order);
                Shape::Harmonics {
                    freq,
                    level,
                    orders,
                }
            }
            Kind::Square | Kind::Triangle | Kind::Saw => Shape::Wave {
                wave: match kind {
                    Kind::Square => Wave::Square,
                    Kind::Triangle => Wave::Triangle,
                    _ => Wave::Saw,
                },
                freq,
                level,
                limit: get("limit")
                    .map(|v| self.positive("limit", v))
                    .transpose()?,
            },
            Kind::Clip => Shape::Clip {
                freq,
                level,
                drive: drive()?,
            },
            Kind::Soft => Shape::Soft {
                freq,
                level,
                drive: drive()?,
                bias: match get("bias") {
                    Some(b) => {
                        let b = self.number("bias", b)?;
                        self.in_range("bias", b, -1.0, 1.0, "")?
                    }
                    None => 0.0,
                },
            },
            Kind::Twin | Kind::Smpte => {
                let (default_hz, default_ratio) = if kind == Kind::Smpte {
                    (DEFAULT_SMPTE_HZ, DEFAULT_SMPTE_RATIO)
                } else {
                    (DEFAULT_TWIN_HZ, 1.0)
                };
                let (f1, f2) = match freq_txt {
                    None => default_hz,
                    Some(pair) => {
                        let (a, b) = pair.split_once('+').ok_or_else(|| {
                            self.invalid(format!(
                                "{kind} needs two frequencies joined by '+', e.g. {kind}:{}+{}, got '{pair}'",
                                default_hz.0, default_hz.1
                            ))
                        })?;
                        (
                            self.positive("frequency", a)?,
                            self.positive("frequency", b)?,
                        )
                    }
                };
                Shape::Twin {
                    f1,
                    f2,
                    level,
                    ratio: get("ratio")
                        .map(|v| self.positive("ratio", v))
                        .transpose()?
                        .unwrap_or(default_ratio),
                }
            }
            Kind::Noise => Shape::Noise { level },
            Kind::Silence => Shape::Silence,
        };

        let common = Common {
            noise_db: get("noise").map(|v| self.level_key(v)).transpose()?,
            dc: get("dc")
                .map(|v| self.number("dc", v))
                .transpose()?
                .unwrap_or(0.0),
            phase_deg: get("phase")
                .map(|v| self.number("phase", v))
                .transpose()?
                .unwrap_or(0.0),
            start_s: get("start")
                .map(|v| {
                    let t = self.number("start", v)?;
                    self.in_range("start", t, 0.0, 3600.0, " s")
                })
                .transpose()?,
            stop_s: get("stop").map(|v| self.positive("stop", v)).transpose()?,
            fade_ms: get("fade")
                .map(|v| {
                    let t = self.number("fade", v)?;
                    self.in_range("fade", t, 0.0, 3_600_000.0, " ms")
                })
                .transpose()?
                .unwrap_or(0.0),
        };
        if let (Some(start), Some(stop)) = (common.start_s, common.stop_s) {
            if stop <= start {
                return Err(self.invalid(format!("stop={stop} must be later than start={start}")));
            }
        }
        Ok(Recipe { shape, common })
    }

    fn level_key(&self, v: &str) -> Result<f64, GenError> {
        let x = self.number("noise level", v)?;
        self.in_range("noise level", x, LEVEL_RANGE.0, LEVEL_RANGE.1, " dB")
    }
}

impl fmt::Display for Recipe {
    /// The canonical form: every value spelled out that differs from its default, keys in a fixed
    /// order. Parsing it gives back an equal recipe.
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        let kind = self.shape.kind();
        match &self.shape {
            Shape::Sine { freq, level } => write!(f, "{kind}:{freq}@{level}")?,
            Shape::Harmonics {
                freq,
                level,
                orders,
            } => {
                write!(f, "{kind}:{freq}@{level}")?;
                for h in orders {
                    write!(f, ",h{}={}", h.order, h.dbc)?;
                }
            }
            Shape::Wave {
                freq, level, limit, ..
            } => {
                write!(f, "{kind}:{freq}@{level}")?;
                if let Some(l) = limit {
                    write!(f, ",limit={l}")?;
                }
            }
            Shape::Clip { freq, level, drive } => write!(f, "{kind}:{freq}@{level},drive={drive}")?,
            Shape::Soft {
                freq,
                level,
                drive,
                bias,
            } => {
                write!(f, "{kind}:{freq}@{level},drive={drive}")?;
                if *bias != 0.0 {
                    write!(f, ",bias={bias}")?;
                }
            }
            Shape::Twin {
                f1,
                f2,
                level,
                ratio,
            } => write!(f, "{kind}:{f1}+{f2}@{level},ratio={ratio}")?,
            Shape::Noise { level } => write!(f, "{kind}@{level}")?,
            Shape::Silence => write!(f, "{kind}")?,
        }
        let c = &self.common;
        if let Some(n) = c.noise_db {
            write!(f, ",noise={n}")?;
        }
        if c.dc != 0.0 {
            write!(f, ",dc={}", c.dc)?;
        }
        if c.phase_deg != 0.0 {
            write!(f, ",phase={}", c.phase_deg)?;
        }
        if let Some(s) = c.start_s {
            write!(f, ",start={s}")?;
        }
        if let Some(s) = c.stop_s {
            write!(f, ",stop={s}")?;
        }
        if c.fade_ms != 0.0 {
            write!(f, ",fade={}", c.fade_ms)?;
        }
        Ok(())
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn err(s: &str) -> String {
        parse_recipe(s).unwrap_err().to_string()
    }

    #[test]
    fn parses_sine_with_defaults_and_values() {
        let r = parse_recipe("sine:997@-20").unwrap();
        assert_eq!(
            r.shape,
            Shape::Sine {
                freq: 997.0,
                level: Sweep::Fixed(-20.0)
            }
        );
        assert_eq!(r.common, Common::default());
        // Defaults: 997 Hz (AES17 test frequency), −20 dBFS.
        let r = parse_recipe("sine").unwrap();
        assert_eq!(
            r.shape,
            Shape::Sine {
                freq: DEFAULT_FREQ_HZ,
                level: Sweep::Fixed(DEFAULT_LEVEL_DB)
            }
        );
    }

    #[test]
    fn parses_every_kind() {
        let r = parse_recipe("harmonics:1000@-20,h5=-80,h2=-40,h3=-60").unwrap();
        let Shape::Harmonics {
            freq,
            level,
            orders,
        } = r.shape
        else {
            panic!("wrong shape")
        };
        assert_eq!((freq, level), (1000.0, -20.0));
        assert_eq!(
            orders.iter().map(|h| (h.order, h.dbc)).collect::<Vec<_>>(),
            [(2, -40.0), (3, -60.0), (5, -80.0)]
        );
        assert_eq!(
            parse_recipe("square:100@-6,limit=5000").unwrap().shape,
            Shape::Wave {
                wave: Wave::Square,
                freq: 100.0,
                level: -6.0,
                limit: Some(5000.0)
            }
        );
        assert!(matches!(
            parse_recipe("triangle:100@-6").unwrap().shape,
            Shape::Wave {
                wave: Wave::Triangle,
                ..
            }
        ));
        assert!(matches!(
            parse_recipe("saw:100@-6").unwrap().shape,
            Shape::Wave {
                wave: Wave::Saw,
                ..
            }
        ));
        assert_eq!(
            parse_recipe("clip:997@-6,drive=6").unwrap().shape,
            Shape::Clip {
                freq: 997.0,
                level: -6.0,
                drive: Sweep::Fixed(6.0)
            }
        );
        assert_eq!(
            parse_recipe("soft:997@-6,drive=6,bias=0.3").unwrap().shape,
            Shape::Soft {
                freq: 997.0,
                level: -6.0,
                drive: Sweep::Fixed(6.0),
                bias: 0.3
            }
        );
        assert_eq!(
            parse_recipe("twin:60+7000@-6,ratio=4").unwrap().shape,
            Shape::Twin {
                f1: 60.0,
                f2: 7000.0,
                level: -6.0,
                ratio: 4.0
            }
        );
        assert_eq!(
            parse_recipe("noise@-60").unwrap().shape,
            Shape::Noise { level: -60.0 }
        );
        // SMPTE RP120 defaults: 60 Hz + 7 kHz at 4:1 (reference-values.md §7); the level is
        // the combined peak, as for twin.
        assert_eq!(
            parse_recipe("smpte@-6").unwrap().shape,
            Shape::Twin {
                f1: 60.0,
                f2: 7000.0,
                level: -6.0,
                ratio: 4.0
            }
        );
        // The DIN variant (250 Hz + 8 kHz, reference-values.md §7) by giving the pair.
        assert_eq!(
            parse_recipe("smpte:250+8000,ratio=4").unwrap().shape,
            Shape::Twin {
                f1: 250.0,
                f2: 8000.0,
                level: DEFAULT_LEVEL_DB,
                ratio: 4.0
            }
        );
        // twin keeps its own defaults: 19 kHz + 20 kHz at 1:1.
        assert_eq!(
            parse_recipe("twin").unwrap().shape,
            Shape::Twin {
                f1: 19000.0,
                f2: 20000.0,
                level: DEFAULT_LEVEL_DB,
                ratio: 1.0
            }
        );
        assert_eq!(parse_recipe("silence").unwrap().shape, Shape::Silence);
    }

    #[test]
    fn parses_common_keys() {
        let r = parse_recipe(
            "clip:997@-6,drive=6,noise=-96,dc=0.01,phase=90,start=0.5,stop=1.5,fade=10",
        )
        .unwrap();
        assert_eq!(
            r.common,
            Common {
                noise_db: Some(-96.0),
                dc: 0.01,
                phase_deg: 90.0,
                start_s: Some(0.5),
                stop_s: Some(1.5),
                fade_ms: 10.0
            }
        );
        // Spaces around separators are tolerated.
        assert_eq!(
            parse_recipe(" sine:1000@-6 , phase = 90 ")
                .unwrap()
                .common
                .phase_deg,
            90.0
        );
    }

    #[test]
    fn parses_sweeps() {
        let Shape::Clip { drive, .. } = parse_recipe("clip:997@-6,drive=0..12").unwrap().shape
        else {
            panic!("wrong shape")
        };
        assert_eq!(
            drive,
            Sweep::Ramp {
                from: 0.0,
                to: 12.0
            }
        );
        let Shape::Clip { drive, .. } = parse_recipe("clip:997@-6,drive=0..12/5").unwrap().shape
        else {
            panic!("wrong shape")
        };
        assert_eq!(
            drive,
            Sweep::Steps {
                from: 0.0,
                to: 12.0,
                steps: 5
            }
        );
        let Shape::Sine { level, .. } = parse_recipe("sine:997@-40..-6/8").unwrap().shape else {
            panic!("wrong shape")
        };
        assert_eq!(
            level,
            Sweep::Steps {
                from: -40.0,
                to: -6.0,
                steps: 8
            }
        );
    }

    #[test]
    fn sweep_values() {
        // The brief's example: 0..12/5 steps through 0, 3, 6, 9, 12 in equal-length steps.
        let s = Sweep::Steps {
            from: 0.0,
            to: 12.0,
            steps: 5,
        };
        let len = 100;
        let vals: Vec<f64> = (0..len).step_by(20).map(|p| s.at(p, len)).collect();
        assert_eq!(vals, [0.0, 3.0, 6.0, 9.0, 12.0]);
        assert_eq!(s.at(19, len), 0.0);
        assert_eq!(s.at(99, len), 12.0);
        let r = Sweep::Ramp {
            from: 0.0,
            to: 12.0,
        };
        assert_eq!(r.at(0, 101), 0.0);
        assert_eq!(r.at(50, 101), 6.0);
        assert_eq!(r.at(100, 101), 12.0);
    }

    #[test]
    fn error_messages_are_exact() {
        assert_eq!(
            err("sqare:100"),
            "unknown signal kind 'sqare' (known: sine, harmonics, square, triangle, saw, clip, \
             soft, twin, smpte, noise, silence)"
        );
        assert_eq!(err("sine:997@-6x"), "bad level '-6x' in 'sine:997@-6x'");
        assert_eq!(err("sine:abc"), "bad frequency 'abc' in 'sine:abc'");
        assert_eq!(err("sine:inf"), "bad frequency 'inf' in 'sine:inf'");
        assert_eq!(
            err("sine:997,drive=3"),
            "unknown key 'drive' for sine (allowed: noise, dc, phase, start, stop, fade)"
        );
        assert_eq!(
            err("clip:997,drive=3,drive=4"),
            "duplicate key 'drive' in 'clip:997,drive=3,drive=4'"
        );
        assert_eq!(
            err("harmonics:1000,h3=-40,h3=-50"),
            "duplicate key 'h3' in 'harmonics:1000,h3=-40,h3=-50'"
        );
        assert_eq!(
            err("harmonics:1000,h41=-40"),
            "harmonic order 'h41' is out of range (h2 to h40) in 'harmonics:1000,h41=-40'"
        );
        assert_eq!(
            err("harmonics:1000,h1=-40"),
            "harmonic order 'h1' is out of range (h2 to h40) in 'harmonics:1000,h1=-40'"
        );
        assert_eq!(
            err("clip:997,drive=0..12/x"),
            "bad step count 'x' in 'clip:997,drive=0..12/x'"
        );
        assert_eq!(
            err("clip:997,drive=0..12/1"),
            "step count 1 is out of range (2 to 10000) in 'clip:997,drive=0..12/1'"
        );
        assert_eq!(
            err("clip:997@-40..-6"),
            "level range '-40..-6' is only allowed for sine in 'clip:997@-40..-6'"
        );
        assert_eq!(
            err("clip:997,drive=-3"),
            "drive -3 is out of range (0 to 60 dB) in 'clip:997,drive=-3'"
        );
        assert_eq!(
            err("soft:997,bias=2"),
            "bias 2 is out of range (-1 to 1) in 'soft:997,bias=2'"
        );
        assert_eq!(
            err("sine:0"),
            "frequency must be above zero, got 0 in 'sine:0'"
        );
        assert_eq!(
            err("noise:100@-60"),
            "noise takes no frequency in 'noise:100@-60'"
        );
        assert_eq!(
            err("silence@-20"),
            "silence takes no level in 'silence@-20'"
        );
        assert_eq!(
            err("sine,phase"),
            "expected key=value, got 'phase' in 'sine,phase'"
        );
        assert_eq!(
            err("sine,start=2,stop=1"),
            "stop=1 must be later than start=2 in 'sine,start=2,stop=1'"
        );
        assert_eq!(
            err("twin:19000@-6"),
            "twin needs two frequencies joined by '+', e.g. twin:19000+20000, got '19000' in \
             'twin:19000@-6'"
        );
        assert_eq!(
            err("smpte:60"),
            "smpte needs two frequencies joined by '+', e.g. smpte:60+7000, got '60' in 'smpte:60'"
        );
        assert_eq!(
            err("smpte,ratio=0"),
            "ratio must be above zero, got 0 in 'smpte,ratio=0'"
        );
        assert_eq!(
            err("smpte,drive=3"),
            "unknown key 'drive' for smpte (allowed: ratio, noise, dc, phase, start, stop, fade)"
        );
        assert_eq!(
            err("noise@-60,phase=90"),
            "unknown key 'phase' for noise (allowed: dc, start, stop, fade)"
        );
        assert_eq!(
            err("sine@50"),
            "level 50 is out of range (-300 to 40 dB) in 'sine@50'"
        );
    }

    #[test]
    fn display_is_canonical_and_round_trips() {
        let cases = [
            ("sine:997@-20", "sine:997@-20"),
            ("sine", "sine:997@-20"),
            ("sine:997@-40..-6/8", "sine:997@-40..-6/8"),
            (
                "harmonics:1000@-20,h5=-80,h2=-40",
                "harmonics:1000@-20,h2=-40,h5=-80",
            ),
            ("square:100@-6,limit=5000", "square:100@-6,limit=5000"),
            ("clip:997@-6", "clip:997@-6,drive=6"),
            ("clip:997@-6,drive=0..12", "clip:997@-6,drive=0..12"),
            (
                "soft:997@-6,drive=6,bias=0.3",
                "soft:997@-6,drive=6,bias=0.3",
            ),
            ("twin", "twin:19000+20000@-20,ratio=1"),
            // smpte is twin with the SMPTE RP120 defaults; it prints in the twin form.
            ("smpte", "twin:60+7000@-20,ratio=4"),
            ("smpte:250+8000@-6", "twin:250+8000@-6,ratio=4"),
            ("smpte,ratio=10", "twin:60+7000@-20,ratio=10"),
            ("noise@-60", "noise@-60"),
            ("silence,dc=0.5", "silence,dc=0.5"),
            (
                "sine:1000@-6,fade=10,stop=1,start=0.5,phase=90,dc=0.1,noise=-96",
                "sine:1000@-6,noise=-96,dc=0.1,phase=90,start=0.5,stop=1,fade=10",
            ),
        ];
        for (input, canonical) in cases {
            let r: Recipe = input.parse().unwrap();
            assert_eq!(r.to_string(), canonical, "for {input}");
            assert_eq!(parse_recipe(&r.to_string()).unwrap(), r, "for {input}");
        }
    }
}
