//! The solver's state: moisture of every cell and, in coupled runs, temperature.

/// Moisture (dry fraction) and temperature (degrees C) of every cell. `temperature` is empty in
/// isothermal runs, where the product is at the air temperature.
#[derive(Debug, PartialEq, Default)]
pub struct State {
    /// Moisture of each cell, dry fraction.
    pub moisture: Vec<f64>,
    /// Temperature of each cell, degrees C; empty when isothermal.
    pub temperature: Vec<f64>,
}

// By hand, for `clone_from`: the derived one clones into new vectors and drops the old ones,
// and the stepper copies states into kept buffers at every stage and row (an allocation and a
// free each); this one copies into the buffers already there.
impl Clone for State {
    fn clone(&self) -> State {
        State {
            moisture: self.moisture.clone(),
            temperature: self.temperature.clone(),
        }
    }

    fn clone_from(&mut self, source: &State) {
        self.moisture.clone_from(&source.moisture);
        self.temperature.clone_from(&source.temperature);
    }
}

impl State {
    /// A state of `n` cells, with temperatures when `coupled`.
    pub fn zeros(n: usize, coupled: bool) -> State {
        State {
            moisture: vec![0.0; n],
            temperature: if coupled { vec![0.0; n] } else { Vec::new() },
        }
    }

    /// Whether temperatures are solved.
    pub fn is_coupled(&self) -> bool {
        !self.temperature.is_empty()
    }

    /// Sets every value, moisture and temperature alike, to `f(own, a, b)` of the same cell.
    pub fn update_with(&mut self, a: &State, b: &State, f: impl Fn(f64, f64, f64) -> f64) {
        for (own, a, b) in [
            (&mut self.moisture, &a.moisture, &b.moisture),
            (&mut self.temperature, &a.temperature, &b.temperature),
        ] {
            for ((o, x), y) in own.iter_mut().zip(a).zip(b) {
                *o = f(*o, *x, *y);
            }
        }
    }

    /// Copies `other` into `self` without allocating.
    pub fn copy_from(&mut self, other: &State) {
        self.moisture.copy_from_slice(&other.moisture);
        self.temperature.copy_from_slice(&other.temperature);
    }
}
