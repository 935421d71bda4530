//! The throttle body: a second-order plate model (motor torque from duty, return springs
//! towards the default position, viscous and Coulomb friction, hard stops) whose parameters are
//! derived from the policy's `actuator` figures.
