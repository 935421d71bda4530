//! The closed loop of one vehicle: true positions, the wiring with its injected faults, the
//! controller (through the one controller step) and the throttle body. The simulator and the
//! prover both drive it, so they share one semantics.

use crate::controller::{Controller, Event, Outputs, Sample, State};
use crate::faults::{self, ActiveFault, Injection};
use crate::model::{Model, SensorId};
use crate::plant::{ActuatorCondition, PlantError, PlantParams, PlantState, Plate};

use crate::time::Time;

/// What every run of one policy shares: the prepared controller and the derived plate.
#[derive(Clone, Debug)]
pub struct Vehicle {
    pub ctl: Controller,
    pub plate: Plate,
}

impl Vehicle {
    pub fn new(model: &Model) -> Result<Vehicle, PlantError> {
        Ok(Vehicle {
            ctl: Controller::new(model),
            plate: Plate::new(PlantParams::derive(&model.actuator)?),
        })
    }
}

/// One vehicle's moment-to-moment state. Cheap to clone: the prover keeps one per visited
/// state.
#[derive(Clone, Debug)]
pub struct System<'v> {
    ctl: &'v Controller,
    params: &'v Plate,
    /// Whether the key is on.
    key: bool,
    /// The controller's memory; `None` until the first step after key on.
    state: Option<State>,
    out: Outputs,
    plate: PlantState,
    /// True positions per sensor, percent; the feedback sensor's entry follows the plate.
    positions: Vec<f64>,
    sample: Sample,
    active: Vec<ActiveFault>,
    condition: ActuatorCondition,
}

/// What the controller's pins see: each sensor's tracks at its true position (the feedback
/// sensor at the plate's), as the wiring with its active faults delivers them. The one place
/// that turns the world into a sample, for the simulator and the prover alike.
pub fn sample_pins(
    model: &Model,
    positions: &[f64],
    active: &[ActiveFault],
    now: Time,
    sample: &mut Sample,
) {
    for (s, out) in sample.volts.iter_mut().enumerate() {
        let pos = positions.get(s).copied().unwrap_or(0.0);
        faults::sensor_volts(model, s, pos, active, now, out);
    }
}

/// One controller period of a powered vehicle: sample, controller step, then the plate over
/// `dt` with the step's drive. The simulator does the same in two halves, because script
/// events may fall between steps.
#[allow(clippy::too_many_arguments)]
pub fn period(
    vehicle: &Vehicle,
    state: &mut State,
    plate: &mut PlantState,
    positions: &mut [f64],
    active: &[ActiveFault],
    now: Time,
    dt: Time,
    scratch: &mut (Sample, Outputs),
) {
    let model = vehicle.ctl.model();
    positions[model.feedback] = plate.position;
    sample_pins(model, positions, active, now, &mut scratch.0);
    vehicle.ctl.step_in_place(state, &scratch.0, &mut scratch.1);
    let condition = faults::actuator_condition(active);
    *plate = vehicle
        .plate
        .advance(*plate, scratch.1.duty, scratch.1.drive_on, &condition, dt);
}

impl<'v> System<'v> {
    /// Key on at rest: the plate at its default position, the pedal released, inputs at the
    /// top of their band (the most the other controller may ask for).
    pub fn new(vehicle: &'v Vehicle) -> System<'v> {
        let (ctl, params) = (&vehicle.ctl, &vehicle.plate);
        let model = ctl.model();
        let mut sample = Sample::healthy(model, &vec![0.0; model.sensors.len()]);
        sample.inputs = model.inputs.iter().map(|i| i.hi).collect();
        let mut sys = System {
            ctl,
            params,
            key: true,
            state: None,
            out: Outputs::default(),
            plate: PlantState::at_rest(model.actuator.default),
            positions: vec![0.0; model.sensors.len()],
            sample,
            active: Vec::new(),
            condition: ActuatorCondition::HEALTHY,
        };
        sys.positions[model.feedback] = model.actuator.default;
        sys.out.target = model.actuator.default;
        sys
    }

    pub fn model(&self) -> &'v Model {
        self.ctl.model()
    }

    pub fn set_position(&mut self, sensor: SensorId, percent: f64) {
        if sensor != self.model().feedback
            && let Some(p) = self.positions.get_mut(sensor)
        {
            *p = percent.clamp(0.0, 100.0);
        }
    }

    pub fn set_switch(&mut self, switch: usize, on: bool) {
        if let Some(s) = self.sample.switches.get_mut(switch) {
            *s = on;
        }
    }

    pub fn set_input(&mut self, input: usize, percent: f64) {
        if let Some(s) = self.sample.inputs.get_mut(input) {
            *s = percent;
        }
    }

    /// Breaks something at instant `now`; a stuck fault captures what it freezes now.
    pub fn inject(&mut self, inj: Injection, now: Time) {
        let model = self.ctl.model();
        let af = ActiveFault::capture(
            model,
            inj,
            now,
            &self.positions,
            self.plate.position,
            &self.active,
        );
        self.active.push(af);
        self.condition = faults::actuator_condition(&self.active);
        if self.condition.stuck_at.is_some() {
            self.plate.velocity = 0.0;
        }
    }

    /// Mends every active fault `which` selects; returns what was mended.
    pub fn mend(&mut self, which: impl Fn(&Injection) -> bool) -> Vec<Injection> {
        let mut mended = Vec::new();
        self.active.retain(|a| {
            if which(&a.injection) {
                mended.push(a.injection);
                false
            } else {
                true
            }
        });
        self.condition = faults::actuator_condition(&self.active);
        mended
    }

    /// The sample buffer, with the inputs and switches as set.
    pub fn sample(&self) -> &Sample {
        &self.sample
    }

    pub fn active_faults(&self) -> &[ActiveFault] {
        &self.active
    }

    pub fn key_off(&mut self) {
        self.key = false;
        self.state = None;
        self.out.duty = 0.0;
        self.out.drive_on = false;
        self.out.target = self.model().actuator.default;
    }

    /// Key on: the controller powers up on its next step, latched faults forgotten.
    pub fn key_on_at(&mut self, _now: Time) {
        self.key = true;
    }

    pub fn key_on(&self) -> bool {
        self.key
    }

    /// Fills the sample with what the input pins see now.
    fn sample_pins(&mut self, now: Time) {
        let model = self.ctl.model();
        self.positions[model.feedback] = self.plate.position;
        sample_pins(model, &self.positions, &self.active, now, &mut self.sample);
    }

    /// One controller step at instant `now`; its events are appended to `events`.
    pub fn controller_tick(&mut self, now: Time, events: &mut Vec<Event>) {
        if !self.key {
            return;
        }
        self.sample_pins(now);
        let state = match self.state.as_mut() {
            Some(s) => s,
            None => self.state.insert(self.ctl.power_up(&self.sample)),
        };
        self.ctl.step_in_place(state, &self.sample, &mut self.out);
        events.extend_from_slice(&self.out.events);
    }

    /// Advances the plate by `dt` with the duty of the last step.
    pub fn advance_plant(&mut self, _now: Time, dt: Time) {
        let on = self.key && self.out.drive_on;
        self.plate = self
            .params
            .advance(self.plate, self.out.duty, on, &self.condition, dt);
    }

    /// Advances the plate by `dt` in one closed-form jump if no event of the plate falls
    /// inside it (see [`crate::plant::Plate::jump`]); says whether it did. The position then
    /// moved monotonically, so every sub-step in between lay between the two ends.
    pub fn jump_plant(&mut self, dt: Time) -> bool {
        let on = self.key && self.out.drive_on;
        match self
            .params
            .jump(self.plate, self.out.duty, on, &self.condition, dt)
        {
            Some(p) => {
                self.plate = p;
                true
            }
            None => false,
        }
    }

    /// Puts the plate back where a failed look-ahead found it.
    pub fn set_plate(&mut self, plate: crate::plant::PlantState) {
        self.plate = plate;
    }

    pub fn substep(&self) -> Time {
        self.params.params.substep()
    }

    pub fn opening(&self) -> f64 {
        self.plate.position
    }

    pub fn plate(&self) -> PlantState {
        self.plate
    }

    pub fn merged(&self, sensor: SensorId) -> f64 {
        if self.state.is_none() {
            return 0.0;
        }
        self.out.merged.get(sensor).copied().unwrap_or(0.0)
    }

    pub fn target(&self) -> f64 {
        self.out.target
    }

    pub fn duty(&self) -> f64 {
        if self.key && self.out.drive_on {
            self.out.duty
        } else {
            0.0
        }
    }

    pub fn mode(&self) -> usize {
        self.state.as_ref().map_or(self.model().start, |s| s.mode())
    }

    pub fn fault_set(&self, f: usize) -> bool {
        self.state.as_ref().is_some_and(|s| s.fault_set(f))
    }

    pub fn fault_pending(&self, f: usize) -> bool {
        self.state.as_ref().is_some_and(|s| s.fault_pending(f))
    }

    pub fn controller_state(&self) -> Option<&State> {
        self.state.as_ref()
    }

    /// This vehicle with its controller's memory and plate replaced: what a vehicle driven
    /// like this one (same key, sample inputs, switches, faults and actuator) is once it has
    /// reached `state` and `plate`. A step recomputes every output from the state and the
    /// sample, so nothing else of the vehicle it came from carries over. The prover keeps
    /// fault-free states this compactly and makes vehicles of them again when it steps them.
    pub fn with_state(&self, state: Option<&State>, plate: PlantState) -> System<'v> {
        let mut sys = self.clone();
        sys.state = state.cloned();
        sys.plate = plate;
        sys.positions[self.ctl.model().feedback] = plate.position;
        sys
    }

    pub fn controller(&self) -> &'v Controller {
        self.ctl
    }

    /// The true position of a sensor the driver moves, percent.
    pub fn position(&self, sensor: SensorId) -> f64 {
        self.positions.get(sensor).copied().unwrap_or(0.0)
    }
}
