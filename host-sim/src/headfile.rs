//! Coil-head files for `replay --head` (TOML, our own format).
//!
//! ```toml
//! name = "bench head"
//! [[coil]]
//! position_m = [0.0, 0.0, 0.0]   # relative to the lower coil centre: x forward, y left, z up
//! axis = [1.0, 0.0, 0.0]          # unit vector
//! gain = 1.0                      # relative gain
//! role = "lower-x"                # lower-x|lower-y|lower-z|upper-x|upper-y|upper-z|none
//! ```
//! One `[[coil]]` per recording channel, in channel order.

use crate::error::{Result, SimError};
use serde::Deserialize;
use std::path::Path;
use undertone_dsp::field::head::{Coil, Roles};
use undertone_dsp::Head;

/// A head file.
#[derive(Clone, Debug, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct HeadFile {
    /// Name.
    #[serde(default)]
    pub name: String,
    /// Coils in channel order.
    pub coil: Vec<CoilSpec>,
}

/// One coil.
#[derive(Clone, Debug, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct CoilSpec {
    /// Position, m.
    pub position_m: [f32; 3],
    /// Axis.
    pub axis: [f32; 3],
    /// Gain.
    #[serde(default = "one")]
    pub gain: f32,
    /// Role.
    #[serde(default = "none")]
    pub role: String,
}

fn one() -> f32 {
    1.0
}
fn none() -> String {
    "none".into()
}

impl HeadFile {
    /// Read and check a head file.
    pub fn load(path: &Path) -> Result<Self> {
        let p = path.display().to_string();
        let text = std::fs::read_to_string(path).map_err(|e| SimError::io(path, "read head", e))?;
        let h: HeadFile = toml::from_str(&text).map_err(|e| SimError::Parse { path: p.clone(), msg: e.message().to_string() })?;
        if h.coil.is_empty() || h.coil.len() > 8 {
            return Err(SimError::value(&p, "coil", format!("{} coils", h.coil.len()), "1 to 8 coils"));
        }
        Ok(h)
    }

    /// The head as the DSP crate's type (N must equal the number of coils).
    pub fn to_head<const N: usize>(&self, path: &str) -> Result<Head<N>> {
        if self.coil.len() != N {
            return Err(SimError::value(path, "coil", format!("{} coils", self.coil.len()), format!("{N}")));
        }
        let mut roles = Roles::default();
        let mut coils = [Coil { pos_m: [0.0; 3], axis: [1.0, 0.0, 0.0], gain: 1.0 }; N];
        for (i, c) in self.coil.iter().enumerate() {
            let n = (c.axis.iter().map(|v| v * v).sum::<f32>()).sqrt();
            if !(n > 1e-6) || !n.is_finite() {
                return Err(SimError::value(path, &format!("coil[{i}].axis"), format!("{:?}", c.axis), "a non-zero vector"));
            }
            coils[i] = Coil { pos_m: c.position_m, axis: [c.axis[0] / n, c.axis[1] / n, c.axis[2] / n], gain: c.gain };
            let slot = match c.role.as_str() {
                "lower-x" => Some((0, 0)),
                "lower-y" => Some((0, 1)),
                "lower-z" => Some((0, 2)),
                "upper-x" => Some((1, 0)),
                "upper-y" => Some((1, 1)),
                "upper-z" => Some((1, 2)),
                "none" => None,
                other => {
                    return Err(SimError::value(
                        path,
                        &format!("coil[{i}].role"),
                        format!("\"{other}\""),
                        "lower-x, lower-y, lower-z, upper-x, upper-y, upper-z or none",
                    ))
                }
            };
            if let Some((level, k)) = slot {
                let r = if level == 0 { &mut roles.lower } else { &mut roles.upper };
                r[k] = Some(i as u8);
            }
        }
        let head = Head { coils, roles };
        head.validate().map_err(|err| SimError::Config { context: path.to_string(), err })?;
        Ok(head)
    }
}
