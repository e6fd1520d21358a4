//! The physics model behind the demo data, the tests and what-if studies: a transistor
//! turning an inductive load off, with a choice of clamp.
