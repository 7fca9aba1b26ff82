//! Simulator of labelled coupled systems. INTERFACE SKETCH: the simulator work replaces it.
