//! Fault injectors: blocks the runner puts between the others, so the plant and
//! the controller stay unaware of them.
//!
//! | injector | sits between | effect while active |
//! |---|---|---|
//! | `SensorOpen` | ADC and controller | the reading is full scale (an open input pulled up, common practice for detectable sensor loss) |
//! | `SensorShorted` | ADC and controller | the reading is 0 counts (amplifier output shorted to ground) |
//! | `SensorStuck` | ADC and controller | the reading stays at the last value before the fault began |
//! | `BusLevel` | supply and bridge | the supply's open-circuit voltage is replaced (a dip or a surge) |
//! | `LockedRotor` | load and motor | the shaft is held at zero speed |
//! | `LoadStep` | load and motor | a torque is added to the load profile |

use crate::model_error::ModelError;

/// What a fault does.
#[derive(Clone, Copy, Debug, PartialEq)]
pub enum FaultKind {
    /// Current-sense input open: full-scale reading.
    SensorOpen,
    /// Current-sense output shorted to ground: zero reading.
    SensorShorted,
    /// Current-sense reading frozen.
    SensorStuck,
    /// Supply voltage replaced by this value, volts.
    BusLevel(f64),
    /// Rotor held.
    LockedRotor,
    /// Extra load torque, N m (positive opposes forward rotation).
    LoadStep(f64),
}

/// One injected fault and its time window `[start_s, end_s)`.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct Injection {
    /// What it does.
    pub kind: FaultKind,
    /// When it begins, seconds.
    pub start_s: f64,
    /// When it ends, seconds (`None`: until the end of the run).
    pub end_s: Option<f64>,
}

impl Injection {
    fn active(&self, t_s: f64) -> bool {
        t_s >= self.start_s && self.end_s.is_none_or(|end| t_s < end)
    }
}

/// All injected faults of a run.
#[derive(Clone, Debug, Default)]
pub struct Injectors {
    list: Vec<Injection>,
    stuck_counts: Option<u16>,
    last_counts: u16,
}

impl Injectors {
    /// Checks the windows; `index` in errors is the position in the list.
    pub fn new(list: Vec<Injection>) -> Result<Self, ModelError> {
        for (k, inj) in list.iter().enumerate() {
            ModelError::non_negative(&format!("faults[{k}].start_s"), inj.start_s)?;
            if let Some(end) = inj.end_s
                && !(end.is_finite() && end > inj.start_s)
            {
                return Err(ModelError::new(
                    format!("faults[{k}].end_s"),
                    end,
                    "after start_s",
                ));
            }
            match inj.kind {
                FaultKind::BusLevel(v) => {
                    ModelError::non_negative(&format!("faults[{k}].supply_v"), v)?;
                }
                FaultKind::LoadStep(t) => {
                    ModelError::finite(&format!("faults[{k}].torque_n_m"), t)?;
                }
                _ => {}
            }
        }
        Ok(Self {
            list,
            stuck_counts: None,
            last_counts: 0,
        })
    }

    /// The list.
    pub fn list(&self) -> &[Injection] {
        &self.list
    }

    /// The reading the controller sees at `t_s` for an ADC result.
    pub fn reading(&mut self, t_s: f64, counts: u16, full_scale: u16) -> u16 {
        let mut out = counts;
        let mut stuck = false;
        for inj in self.list.iter().filter(|i| i.active(t_s)) {
            match inj.kind {
                FaultKind::SensorOpen => out = full_scale,
                FaultKind::SensorShorted => out = 0,
                FaultKind::SensorStuck => stuck = true,
                _ => {}
            }
        }
        if stuck {
            let held = *self.stuck_counts.get_or_insert(self.last_counts);
            out = held;
        } else {
            self.stuck_counts = None;
        }
        self.last_counts = out;
        out
    }

    /// The supply voltage at `t_s`, given its nominal value.
    pub fn supply_v(&self, t_s: f64, nominal_v: f64) -> f64 {
        self.list
            .iter()
            .filter(|i| i.active(t_s))
            .fold(nominal_v, |v, inj| match inj.kind {
                FaultKind::BusLevel(level) => level,
                _ => v,
            })
    }

    /// Whether the rotor is held at `t_s`.
    pub fn rotor_held(&self, t_s: f64) -> bool {
        self.list
            .iter()
            .any(|i| i.active(t_s) && i.kind == FaultKind::LockedRotor)
    }

    /// The extra load torque at `t_s`, N m.
    pub fn extra_torque_n_m(&self, t_s: f64) -> f64 {
        self.list
            .iter()
            .filter(|i| i.active(t_s))
            .map(|inj| match inj.kind {
                FaultKind::LoadStep(t) => t,
                _ => 0.0,
            })
            .sum()
    }

    /// The times at which something starts or ends, for the runner to stop at.
    pub fn edges(&self) -> impl Iterator<Item = f64> + '_ {
        self.list
            .iter()
            .flat_map(|i| std::iter::once(i.start_s).chain(i.end_s))
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn stuck_holds_the_last_good_reading_then_releases() {
        let mut inj = Injectors::new(vec![Injection {
            kind: FaultKind::SensorStuck,
            start_s: 1.0,
            end_s: Some(2.0),
        }])
        .unwrap();
        assert_eq!(inj.reading(0.5, 100, 4095), 100);
        assert_eq!(inj.reading(1.0, 200, 4095), 100);
        assert_eq!(inj.reading(1.5, 300, 4095), 100);
        assert_eq!(inj.reading(2.0, 400, 4095), 400);
    }

    #[test]
    fn refuses_a_window_that_ends_before_it_starts() {
        let e = Injectors::new(vec![Injection {
            kind: FaultKind::SensorOpen,
            start_s: 1.0,
            end_s: Some(0.5),
        }])
        .unwrap_err();
        assert_eq!(e.field, "faults[0].end_s");
    }
}
