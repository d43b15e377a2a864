//! The schedule walker: which step is in force, when it ends (its hours or its moisture
//! trigger), steps skipped because their trigger is already reached, and the record of every
//! step for the `steps` sheet. The run loop asks it and tells it; it drives the stepper's
//! schedule step and triggers.

use super::driver::surface_equilibrium;
use super::problem::{Air, Problem, StepPlan};
use super::stepper::Stepper;

/// How a schedule step ended.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum StepEnd {
    /// Its hours ran out.
    Time,
    /// The mean moisture reached its `until_moisture`.
    Moisture,
    /// The mean moisture reached the case's target; the run ended.
    Target,
    /// The run's end time came first.
    End,
    /// Its `until_moisture` was already reached when it began: it did not run.
    Skipped,
}

impl StepEnd {
    /// The word the `steps` sheet shows.
    pub fn as_str(self) -> &'static str {
        match self {
            StepEnd::Time => "time",
            StepEnd::Moisture => "moisture",
            StepEnd::Target => "target",
            StepEnd::End => "end",
            StepEnd::Skipped => "skipped",
        }
    }
}

/// One schedule step that ran or was skipped.
#[derive(Debug, Clone, PartialEq)]
pub struct StepRecord {
    /// Index into the schedule.
    pub index: usize,
    /// When it began, s.
    pub start: f64,
    /// When it ended, s.
    pub end: f64,
    /// Why it ended.
    pub ended_by: StepEnd,
    /// Mean moisture at its end, dry fraction.
    pub mean_at_end: f64,
    /// The (surface, centre) moistures, dry fraction, where |surface - centre| was largest
    /// within the step (`None` when skipped).
    pub max_difference_pair: Option<(f64, f64)>,
    /// Air at its end (a skipped step: the air it would have ended with).
    pub air_at_end: Air,
}

/// Walks the schedule of one run.
#[derive(Debug, Clone)]
pub(crate) struct ScheduleWalker {
    /// The schedule has run out: the last step's air is held.
    done: bool,
    /// When each step began, s, with its index.
    pub starts: Vec<(f64, usize)>,
    /// Each step that ran or was skipped.
    pub records: Vec<StepRecord>,
    /// Skipped steps and a schedule that ran out, in the order they happened.
    pub warnings: Vec<String>,
    /// Largest |surface - centre| within the step in force, with its (surface, centre).
    step_max: Option<(f64, (f64, f64))>,
}

impl ScheduleWalker {
    pub fn new() -> ScheduleWalker {
        ScheduleWalker {
            done: false,
            starts: vec![(0.0, 0)],
            records: Vec::new(),
            warnings: Vec::new(),
            step_max: None,
        }
    }

    /// End of the schedule step in force, if it has a duration.
    pub fn step_end(&self, p: &Problem, stepper: &Stepper<'_>) -> Option<f64> {
        if self.done {
            return None;
        }
        let (i, start) = stepper.schedule_step();
        p.steps.get(i)?.duration.map(|d| start + d)
    }

    /// Tells the stepper which mean moistures end the run (the target) or the step.
    ///
    /// A level beyond the equilibrium the step's air drives the body towards (past it, seen from
    /// the mean now) is not armed: the mean only approaches that equilibrium, and the time
    /// steps can dip past it by up to about the tolerance times the range dried (the error
    /// they are allowed), which must not count as reaching a level the air cannot bring.
    fn set_triggers(&self, p: &Problem, stepper: &mut Stepper<'_>) {
        let (i, _) = stepper.schedule_step();
        let step = p.steps.get(i);
        let until = if self.done {
            None
        } else {
            step.and_then(|s| s.until_moisture)
        };
        let mean = p.mean(stepper.moisture());
        let reachable = |level: Option<f64>| {
            level.filter(|&l| step.is_none_or(|s| within_reach(p, s, mean, l)))
        };
        stepper.set_triggers([reachable(p.target), reachable(until)]);
    }

    /// A surface-centre difference seen at the current state.
    pub fn note_difference(&mut self, d: f64, pair: (f64, f64)) {
        if self.step_max.is_none_or(|(m, _)| d > m) {
            self.step_max = Some((d, pair));
        }
    }

    /// Records the end of the step in force (nothing once the schedule has run out: the last
    /// step was recorded when it ended).
    pub fn close(&mut self, p: &Problem, stepper: &Stepper<'_>, ended_by: StepEnd) {
        if self.done {
            return;
        }
        let (index, start) = stepper.schedule_step();
        let t = stepper.time();
        self.records.push(StepRecord {
            index,
            start,
            end: t,
            ended_by,
            mean_at_end: p.mean(stepper.moisture()),
            max_difference_pair: self.step_max.map(|(_, pair)| pair),
            air_at_end: stepper.air_at(t),
        });
    }

    /// Starts the first step.
    pub fn start(&mut self, p: &Problem, stepper: &mut Stepper<'_>) {
        self.settle(p, stepper);
    }

    /// Moves to the next step, or holds the last step's air when the schedule has run out.
    pub fn advance(&mut self, p: &Problem, stepper: &mut Stepper<'_>) {
        if self.move_next(p, stepper) {
            self.settle(p, stepper);
        } else {
            self.set_triggers(p, stepper);
        }
    }

    /// Puts the next step in force; false (with a warning, once) when there is none.
    fn move_next(&mut self, p: &Problem, stepper: &mut Stepper<'_>) -> bool {
        let (i, _) = stepper.schedule_step();
        let t = stepper.time();
        if i + 1 < p.steps.len() {
            stepper.set_schedule_step(i + 1, t);
            self.starts.push((t, i + 1));
            true
        } else {
            if !self.done {
                self.done = true;
                self.warnings.push(format!(
                    "the schedule ran out at {:.3} h; the last step's air was held to the end",
                    t / 3600.0
                ));
            }
            false
        }
    }

    /// The step now in force begins: skipped (with a warning) while its trigger is already
    /// reached, otherwise its within-step figures start afresh.
    fn settle(&mut self, p: &Problem, stepper: &mut Stepper<'_>) {
        while let Some(why) = already_reached(p, stepper) {
            let (index, _) = stepper.schedule_step();
            let t = stepper.time();
            let step = &p.steps[index];
            self.records.push(StepRecord {
                index,
                start: t,
                end: t,
                ended_by: StepEnd::Skipped,
                mean_at_end: p.mean(stepper.moisture()),
                max_difference_pair: None,
                air_at_end: step.to,
            });
            self.warnings.push(format!(
                "step {} ({}) was skipped: when it began at {:.3} h its until_moisture_pct was \
                 already reached ({why})",
                index + 1,
                step.label,
                t / 3600.0,
            ));
            if !self.move_next(p, stepper) {
                self.set_triggers(p, stepper);
                return;
            }
        }
        self.step_max = None;
        self.warn_if_out_of_reach(p, stepper);
        self.set_triggers(p, stepper);
    }

    /// A step whose `until_moisture` lies past the equilibrium its air drives the body towards
    /// cannot end on it (the trigger is not armed, see [`Self::set_triggers`]): said once, as
    /// the step begins, so the user learns why it ran on.
    fn warn_if_out_of_reach(&mut self, p: &Problem, stepper: &Stepper<'_>) {
        let (index, _) = stepper.schedule_step();
        let Some(step) = p.steps.get(index) else {
            return;
        };
        let Some(level) = step.until_moisture else {
            return;
        };
        if within_reach(p, step, p.mean(stepper.moisture()), level) {
            return;
        }
        // Out of reach means a known equilibrium range.
        let Some((lo, hi)) = equilibrium_range(p, step) else {
            return;
        };
        let (lo, hi) = (100.0 * lo, 100.0 * hi);
        let towards = if hi - lo <= 5e-4 {
            format!("{lo:.3} %")
        } else {
            format!("{lo:.3} to {hi:.3} %")
        };
        let then = if step.duration.is_some() {
            "it runs for its hours"
        } else {
            "it runs until the run ends"
        };
        self.warnings.push(format!(
            "step {} ({}) cannot end on its until_moisture_pct {:.3} %: that lies past the \
             equilibrium its air drives the product towards ({towards}); {then}",
            index + 1,
            step.label,
            100.0 * level,
        ));
    }
}

/// The mean moisture `step`'s air `air` drives the body towards: the whole body's equilibrium,
/// else the surface's.
fn equilibrium_towards(p: &Problem, step: &StepPlan, air: Air) -> Option<f64> {
    p.equilibrium_mean(step, air)
        .filter(|x| x.is_finite())
        .or_else(|| surface_equilibrium(p, step, air))
}

/// Whether the air of `step` can bring the mean moisture from `mean` to `level`: not when the
/// level lies past every equilibrium the step's air (at its start and its end, for a ramp)
/// drives the body towards. Without a known equilibrium, every level counts as reachable.
fn within_reach(p: &Problem, step: &StepPlan, mean: f64, level: f64) -> bool {
    match equilibrium_range(p, step) {
        Some((lowest, highest)) if mean > highest => level >= lowest,
        Some((lowest, highest)) if mean < lowest => level <= highest,
        _ => true,
    }
}

/// The lowest and highest equilibrium `step`'s air drives the body towards (at its start and
/// its end, for a ramp), where one is known.
fn equilibrium_range(p: &Problem, step: &StepPlan) -> Option<(f64, f64)> {
    [step.from, step.to]
        .into_iter()
        .filter_map(|air| equilibrium_towards(p, step, air))
        .fold(None, |range, x| match range {
            None => Some((x, x)),
            Some((lo, hi)) => Some((f64::min(lo, x), f64::max(hi, x))),
        })
}

/// Whether the step in force began with its `until_moisture` already reached, judged from its
/// own air: a step whose air dries the body (mean above the equilibrium it drives towards) has
/// reached a level at or above the mean; one whose air wets it, a level at or below. Returns
/// why, as the end of the warning's sentence.
fn already_reached(p: &Problem, stepper: &Stepper<'_>) -> Option<&'static str> {
    let (index, _) = stepper.schedule_step();
    let step = p.steps.get(index)?;
    let level = step.until_moisture?;
    let mean = p.mean(stepper.moisture());
    if mean == level {
        return Some("the mean stood exactly at it");
    }
    let eq = equilibrium_towards(p, step, step.to)?;
    if mean > eq && mean <= level {
        Some("the step's air dries the product and the mean was already at or below it")
    } else if mean < eq && mean >= level {
        Some("the step's air wets the product and the mean was already at or above it")
    } else {
        None
    }
}
