//! The damped RLC model of the switch node: fit of the ringing, parasitic extraction,
//! clipped-peak reconstruction and suppression advice.
