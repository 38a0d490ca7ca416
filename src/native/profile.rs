//! Device profiles: a TOML schema of tutti's own (documented in
//! docs/device-profile.md), validated with located errors.
//!
//! Invariant: a [`Profile`] that [`Profile::from_toml`] returns has at least one
//! ion, non-negative finite durations and errors, positive coherence times and a
//! crosstalk matrix of size `ions x ions` with zero diagonal.

use serde::Deserialize;

/// The demo profile's text, embedded in the binary.
pub const DEMO_TOML: &str = include_str!("../../profiles/demo.toml");

#[derive(Debug, Clone, Copy, PartialEq, Deserialize, serde::Serialize, Default)]
#[serde(deny_unknown_fields)]
pub struct Cost {
    pub fixed: f64,
    pub per_rad: f64,
}

impl Cost {
    /// `fixed + per_rad * |theta|`.
    pub fn at(&self, theta: f64) -> f64 {
        self.fixed + self.per_rad * theta.abs()
    }
}

#[derive(Debug, Clone, PartialEq, Deserialize, serde::Serialize)]
#[serde(deny_unknown_fields)]
pub struct Device {
    pub name: String,
    pub ions: u32,
}

#[derive(Debug, Clone, Copy, PartialEq, Deserialize, serde::Serialize, Default)]
#[serde(deny_unknown_fields)]
pub struct Capabilities {
    #[serde(default)]
    pub pair_ms: bool,
    /// Key `ion_rotate`: addressed resonant rotations of one ion.
    #[serde(default, rename = "ion_rotate")]
    pub addressed_rotation: bool,
    /// Key `hide`: hiding (and unhiding) ions.
    #[serde(default, rename = "hide")]
    pub hiding: bool,
    #[serde(default)]
    pub parallel_light_shifts: bool,
    /// Key `negative_chain_ms`: chain MS pulses of negative area, `MS(theta, phi)`
    /// with `theta < 0` (on most machines the interaction's sign follows the sign of
    /// the detuning: common practice). The optimizer emits them only when set.
    #[serde(default)]
    pub negative_chain_ms: bool,
}

/// One [`Cost`] per kind of operation.
#[derive(Debug, Clone, Copy, PartialEq, Deserialize, serde::Serialize)]
#[serde(deny_unknown_fields)]
pub struct PerOp {
    #[serde(rename = "chain_rotate")]
    pub collective: Cost,
    pub light_shift: Cost,
    #[serde(rename = "chain_ms")]
    pub ms: Cost,
    #[serde(default)]
    pub pair_ms: Option<Cost>,
    #[serde(default, rename = "ion_rotate")]
    pub addressed: Option<Cost>,
    #[serde(default)]
    pub hide: Option<Cost>,
    #[serde(default)]
    pub unhide: Option<Cost>,
    pub measure: Cost,
    pub reset: Cost,
}

#[derive(Debug, Clone, Copy, PartialEq, Deserialize, serde::Serialize)]
#[serde(deny_unknown_fields)]
pub struct Coherence {
    pub t1_us: f64,
    pub t2_us: f64,
}

#[derive(Debug, Clone, PartialEq, Deserialize, serde::Serialize, Default)]
#[serde(deny_unknown_fields)]
pub struct Crosstalk {
    pub nearest: Option<f64>,
    pub far: Option<f64>,
    pub matrix: Option<Vec<Vec<f64>>>,
}

/// A validated device profile.
#[derive(Debug, Clone, PartialEq, Deserialize, serde::Serialize)]
#[serde(deny_unknown_fields)]
pub struct Profile {
    pub device: Device,
    #[serde(default)]
    pub capabilities: Capabilities,
    pub durations_us: PerOp,
    pub errors: PerOp,
    pub coherence: Coherence,
    #[serde(default)]
    pub crosstalk: Crosstalk,
}

#[derive(Debug, Clone, PartialEq, thiserror::Error)]
pub enum ProfileError {
    #[error("{name}: {message}")]
    Syntax { name: String, message: String },
    #[error("{name}: {message}\n  hint: {hint}")]
    Invalid {
        name: String,
        message: String,
        hint: String,
    },
}

impl Profile {
    /// The embedded demo profile.
    pub fn demo() -> Profile {
        Profile::from_toml("demo", DEMO_TOML).expect("the embedded demo profile is valid")
    }

    /// Parses and validates a profile; `name` is shown in errors.
    pub fn from_toml(name: &str, text: &str) -> Result<Profile, ProfileError> {
        let p: Profile = toml::from_str(text).map_err(|e| ProfileError::Syntax {
            name: name.to_string(),
            message: e.to_string(),
        })?;
        p.validate(name)?;
        Ok(p)
    }

    fn validate(&self, name: &str) -> Result<(), ProfileError> {
        let bad = |message: String, hint: &str| ProfileError::Invalid {
            name: name.to_string(),
            message,
            hint: hint.to_string(),
        };
        if self.device.ions == 0 {
            return Err(bad(
                "device.ions is 0".into(),
                "a device has at least one ion",
            ));
        }
        for (table, per) in [
            ("durations_us", &self.durations_us),
            ("errors", &self.errors),
        ] {
            let entries = [
                ("chain_rotate", Some(per.collective)),
                ("light_shift", Some(per.light_shift)),
                ("chain_ms", Some(per.ms)),
                ("pair_ms", per.pair_ms),
                ("ion_rotate", per.addressed),
                ("hide", per.hide),
                ("unhide", per.unhide),
                ("measure", Some(per.measure)),
                ("reset", Some(per.reset)),
            ];
            for (key, cost) in entries {
                let Some(cost) = cost else { continue };
                for (part, v) in [("fixed", cost.fixed), ("per_rad", cost.per_rad)] {
                    if !v.is_finite() || v < 0.0 {
                        return Err(bad(
                            format!("{table}.{key}.{part} is {v}"),
                            "durations and error probabilities are finite and not negative",
                        ));
                    }
                }
                if table == "errors" && cost.fixed > 1.0 {
                    return Err(bad(
                        format!("errors.{key}.fixed is {} > 1", cost.fixed),
                        "an error probability is at most 1",
                    ));
                }
            }
        }
        let caps = self.capabilities;
        for (flag, key, cost) in [
            (
                caps.pair_ms,
                "pair_ms",
                self.durations_us.pair_ms.zip(self.errors.pair_ms),
            ),
            (
                caps.addressed_rotation,
                "ion_rotate",
                self.durations_us.addressed.zip(self.errors.addressed),
            ),
            (
                caps.hiding,
                "hide",
                self.durations_us.hide.zip(self.errors.hide),
            ),
            (
                caps.hiding,
                "unhide",
                self.durations_us.unhide.zip(self.errors.unhide),
            ),
        ] {
            if flag && cost.is_none() {
                return Err(bad(
                    format!(
                        "the device has {key} but durations_us.{key} or errors.{key} is missing"
                    ),
                    "give a duration and an error for every operation the device has",
                ));
            }
        }
        let c = self.coherence;
        if !(c.t1_us > 0.0 && c.t2_us > 0.0 && c.t1_us.is_finite() && c.t2_us.is_finite()) {
            return Err(bad(
                "coherence times must be positive".into(),
                "give t1_us and t2_us in microseconds",
            ));
        }
        if let Some(m) = &self.crosstalk.matrix {
            let n = self.device.ions as usize;
            if m.len() != n || m.iter().any(|r| r.len() != n) {
                return Err(bad(
                    format!(
                        "crosstalk.matrix is {}x{}, the device has {n} ions",
                        m.len(),
                        m.first().map_or(0, |r| r.len())
                    ),
                    "give one row of one value per ion for every ion",
                ));
            }
            if (0..n).any(|i| m[i][i] != 0.0)
                || m.iter().flatten().any(|v| !v.is_finite() || *v < 0.0)
            {
                return Err(bad(
                    "crosstalk.matrix must have a zero diagonal and non-negative entries".into(),
                    "entry [i][j] is the fraction of a light shift on ion j that ion i sees",
                ));
            }
        }
        for v in [self.crosstalk.nearest, self.crosstalk.far]
            .into_iter()
            .flatten()
        {
            if !(0.0..1.0).contains(&v) {
                return Err(bad(
                    format!("crosstalk value {v} is outside [0, 1)"),
                    "crosstalk is a fraction of the angle",
                ));
            }
        }
        Ok(())
    }

    /// The fraction of a light shift on ion `j` that ion `i` sees.
    pub fn crosstalk(&self, i: usize, j: usize) -> f64 {
        if i == j {
            return 0.0;
        }
        if let Some(m) = &self.crosstalk.matrix {
            return m[i][j];
        }
        if i.abs_diff(j) == 1 {
            self.crosstalk.nearest.unwrap_or(0.0)
        } else {
            self.crosstalk.far.unwrap_or(0.0)
        }
    }

    /// The same profile with another ion count (crosstalk matrix dropped if present).
    pub fn with_ions(&self, ions: u32) -> Profile {
        let mut p = self.clone();
        p.device.ions = ions;
        if p.crosstalk.matrix.is_some() {
            p.crosstalk.matrix = None;
        }
        p
    }
}
