//! Frequency transformations (lowpass, highpass, bandpass, bandstop) and
//! impedance scaling of a normalized ladder into a netlist.
