//! Initial concentration fields: point values at cell centres (DESIGN §3 `[initial]`).

use crate::error::{finite, invalid, positive, ModelError};

/// The initial field kinds.
#[derive(Debug, Clone, Copy, PartialEq)]
pub enum Initial {
    /// Zero everywhere.
    Zero,
    /// One value everywhere.
    Uniform {
        /// The value.
        value: f64,
    },
    /// `peak exp(-r^2 / (2 sigma^2))`.
    Gaussian {
        /// Centre, m.
        centre: (f64, f64),
        /// Standard deviation, m.
        sigma: f64,
        /// Value at the centre.
        peak: f64,
    },
    /// `peak max(0, 1 - r/radius)` (the cone of solid-body rotation tests).
    Cone {
        /// Centre, m.
        centre: (f64, f64),
        /// Base radius, m.
        radius: f64,
        /// Height.
        peak: f64,
    },
    /// Zalesak's (1979) slotted disk: `value` inside a disk with a slot of `slot_width` cut
    /// from its southern edge up to `slot_length`, zero elsewhere.
    SlottedDisk {
        /// Disk centre, m.
        centre: (f64, f64),
        /// Disk radius, m.
        radius: f64,
        /// Slot width, m.
        slot_width: f64,
        /// Slot length from the southern edge, m.
        slot_length: f64,
        /// Value inside.
        value: f64,
    },
}

impl Initial {
    /// Checks every number.
    pub fn validate(&self) -> Result<(), ModelError> {
        match *self {
            Initial::Zero => {}
            Initial::Uniform { value } => {
                finite("initial.value", value)?;
            }
            Initial::Gaussian { centre, sigma, peak } => {
                finite("initial.centre[0]", centre.0)?;
                finite("initial.centre[1]", centre.1)?;
                positive("initial.sigma", sigma)?;
                finite("initial.peak", peak)?;
            }
            Initial::Cone { centre, radius, peak } => {
                finite("initial.centre[0]", centre.0)?;
                finite("initial.centre[1]", centre.1)?;
                positive("initial.radius", radius)?;
                finite("initial.peak", peak)?;
            }
            Initial::SlottedDisk {
                centre,
                radius,
                slot_width,
                slot_length,
                value,
            } => {
                finite("initial.centre[0]", centre.0)?;
                finite("initial.centre[1]", centre.1)?;
                positive("initial.radius", radius)?;
                positive("initial.slot_width", slot_width)?;
                positive("initial.slot_length", slot_length)?;
                finite("initial.value", value)?;
                if slot_width >= 2.0 * radius {
                    return Err(invalid(
                        "initial.slot_width",
                        slot_width,
                        format!("less than the diameter {}", 2.0 * radius),
                    ));
                }
            }
        }
        Ok(())
    }

    /// The value at (x, y).
    pub fn value_at(&self, x: f64, y: f64) -> f64 {
        match *self {
            Initial::Zero => 0.0,
            Initial::Uniform { value } => value,
            Initial::Gaussian { centre, sigma, peak } => {
                let r2 = (x - centre.0).powi(2) + (y - centre.1).powi(2);
                peak * (-0.5 * r2 / (sigma * sigma)).exp()
            }
            Initial::Cone { centre, radius, peak } => {
                let r = ((x - centre.0).powi(2) + (y - centre.1).powi(2)).sqrt();
                peak * (1.0 - r / radius).max(0.0)
            }
            Initial::SlottedDisk {
                centre,
                radius,
                slot_width,
                slot_length,
                value,
            } => {
                let r = ((x - centre.0).powi(2) + (y - centre.1).powi(2)).sqrt();
                let in_slot = (x - centre.0).abs() < 0.5 * slot_width && y < centre.1 - radius + slot_length;
                if r <= radius && !in_slot {
                    value
                } else {
                    0.0
                }
            }
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn shapes() {
        let c = Initial::Cone {
            centre: (0.0, 0.0),
            radius: 2.0,
            peak: 4.0,
        };
        assert_eq!(c.value_at(1.0, 0.0), 2.0);
        assert_eq!(c.value_at(3.0, 0.0), 0.0);
        // Zalesak (1979): disk radius 15 at (50, 75), slot 5 wide and 25 long.
        let d = Initial::SlottedDisk {
            centre: (50.0, 75.0),
            radius: 15.0,
            slot_width: 5.0,
            slot_length: 25.0,
            value: 1.0,
        };
        assert_eq!(d.value_at(50.0, 70.0), 0.0); // in the slot
        assert_eq!(d.value_at(50.0, 86.0), 1.0); // above it
        assert_eq!(d.value_at(44.0, 70.0), 1.0);
        assert!(d.validate().is_ok());
        assert!(Initial::Gaussian {
            centre: (0.0, 0.0),
            sigma: 0.0,
            peak: 1.0
        }
        .validate()
        .is_err());
    }
}
